// The NPY reader against arrays NumPy wrote (tests/reference/make_npy_fixtures.py; expected
// shapes and values in tests/fixtures/npy/expected.json), and against malformed images.
#include <cmath>
#include <cstdint>
#include <fstream>
#include <limits>
#include <set>
#include <string>

#include <catch2/catch.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/npy.h"
#include "support/error_matcher.h"
#include "support/temp_dir.h"

namespace {

using plaudit::ExitCode;
using plaudit::io::DType;
using plaudit::io::NdArray;
using plaudit::testing::IsError;
using plaudit::testing::ReadBytes;
using plaudit::testing::TempDir;

const std::string kNpyDir = std::string(PLAUDIT_FIXTURES) + "/npy/";

nlohmann::json Expected() {
  std::ifstream in(kNpyDir + "expected.json");
  REQUIRE(in);
  return nlohmann::json::parse(in);
}

DType DTypeOfDescr(const std::string& descr) {
  const std::string kind = descr.substr(1);
  if (kind == "f4") return DType::kF4;
  if (kind == "f8") return DType::kF8;
  if (kind == "i4") return DType::kI4;
  if (kind == "i8") return DType::kI8;
  if (kind == "u1") return DType::kU1;
  return DType::kB1;
}

double ExpectedValue(const nlohmann::json& v) {
  if (v.is_number()) return v.get<double>();
  const auto s = v.get<std::string>();
  if (s == "nan") return std::numeric_limits<double>::quiet_NaN();
  return s == "inf" ? std::numeric_limits<double>::infinity() : -std::numeric_limits<double>::infinity();
}

// Values must match exactly: expected.json holds each stored element's exact double value
// (float32 widens to double without rounding), so even f4 compares bit for bit.
void RequireSameValues(const NdArray& a, const nlohmann::json& values) {
  REQUIRE(a.values.size() == values.size());
  for (std::size_t i = 0; i < a.values.size(); ++i) {
    const double want = ExpectedValue(values[i]);
    INFO("element " << i);
    if (std::isnan(want)) {
      CHECK(std::isnan(a.values[i]));
    } else {
      CHECK(a.values[i] == want);
      CHECK(std::signbit(a.values[i]) == std::signbit(want));
    }
  }
}

// An NPY image with a hand-written header dict, padded as NumPy pads (to 64 bytes).
std::string NpyImage(const std::string& dict, std::size_t payload_bytes, int major = 1) {
  const std::size_t prefix = major == 1 ? 10 : 12;
  std::string header = dict;
  header.append((64 - (prefix + header.size() + 1) % 64) % 64, ' ');
  header.push_back('\n');
  std::string out = "\x93NUMPY";
  out.push_back(static_cast<char>(major));
  out.push_back('\0');
  const std::size_t len_bytes = major == 1 ? 2 : 4;
  for (std::size_t i = 0; i < len_bytes; ++i) out.push_back(static_cast<char>((header.size() >> (8 * i)) & 0xff));
  out += header;
  out.append(payload_bytes, '\0');
  return out;
}

}  // namespace

TEST_CASE("every NumPy-written NPY fixture decodes to its shape and values", "[io][npy]") {
  const auto expected = Expected();
  REQUIRE(expected.at("npy").size() >= 19);  // as many as make_npy_fixtures.py writes
  for (const auto& [file, want] : expected.at("npy").items()) {
    INFO(file << " (descr " << want.at("descr").get<std::string>() << ")");
    const NdArray a = plaudit::io::ReadNpyFile(kNpyDir + file);
    CHECK(a.dtype == DTypeOfDescr(want.at("descr").get<std::string>()));
    CHECK(a.shape == want.at("shape").get<std::vector<std::int64_t>>());
    RequireSameValues(a, want.at("values"));
  }
}

TEST_CASE("fixtures cover every dtype, byte order, storage order and header version", "[io][npy]") {
  const auto npy = Expected().at("npy");
  std::set<std::string> descrs;
  std::set<int> versions;
  std::set<std::size_t> ranks;
  bool fortran = false;
  bool empty = false;
  for (const auto& [file, want] : npy.items()) {
    descrs.insert(want.at("descr").get<std::string>());
    versions.insert(want.at("version")[0].get<int>());
    ranks.insert(want.at("shape").size());
    fortran = fortran || want.at("fortran_order").get<bool>();
    empty = empty || want.at("values").empty();
  }
  CHECK(descrs == std::set<std::string>{"<f4", "<f8", "<i4", "<i8", "|u1", "|b1", ">f8", ">i4"});
  CHECK(versions == std::set<int>{1, 2, 3});
  CHECK(ranks == std::set<std::size_t>{0, 1, 2, 3});
  CHECK(fortran);
  CHECK(empty);
}

TEST_CASE("Fortran-order arrays read as the same C-order values", "[io][npy]") {
  const auto npy = Expected().at("npy");
  int compared = 0;
  for (const auto& [file, want] : npy.items()) {
    if (!want.contains("same_values_as")) continue;
    INFO(file);
    const NdArray f = plaudit::io::ReadNpyFile(kNpyDir + file);
    const NdArray c = plaudit::io::ReadNpyFile(kNpyDir + want.at("same_values_as").get<std::string>());
    CHECK(f.shape == c.shape);
    CHECK(f.values == c.values);
    ++compared;
  }
  CHECK(compared == 3);
  // Spot value, element [1][2] of the 2x3x4 array np.arange(24).reshape(2,3,4) - 11 (NumPy).
  const NdArray a = plaudit::io::ReadNpyFile(kNpyDir + "i4_3d_fortran.npy");
  CHECK(a.values[1 * 12 + 2 * 4 + 0] == 1 * 12 + 2 * 4 - 11);
}

TEST_CASE("NPY images that are malformed fail with kBadData naming the source", "[io][npy]") {
  const std::string good = ReadBytes(kNpyDir + "f8_2d.npy");
  const std::string where = "run/snapshots/bad.npy";

  SECTION("missing magic") {
    std::string bytes = good;
    bytes[0] = 'X';
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(bytes, where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "magic"}));
  }
  SECTION("shorter than the fixed prefix") {
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(good.substr(0, 7), where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "truncated"}));
  }
  SECTION("truncated inside the header") {
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(good.substr(0, 40), where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "truncated inside the header"}));
  }
  SECTION("truncated payload") {
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(good.substr(0, good.size() - 8), where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "12 elements", "truncated"}));
  }
  SECTION("element count overflows 64 bits") {
    const auto bytes = NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (4294967296, 4294967296, 16), }", 64);
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(bytes, where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "overflows"}));
  }
  SECTION("shape entry beyond int64") {
    const auto bytes = NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (99999999999999999999,), }", 8);
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(bytes, where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "overflows"}));
  }
  SECTION("unsupported dtypes") {
    for (const char* descr : {"<c16", "<f2", "<U8", "<u2"}) {
      INFO(descr);
      const auto bytes = NpyImage(fmt::format("{{'descr': '{}', 'fortran_order': False, 'shape': (2,), }}", descr), 64);
      REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(bytes, where), plaudit::Error,
                             IsError(ExitCode::kBadData, {where, descr, "not supported"}));
    }
  }
  SECTION("structured dtype") {
    const auto bytes = NpyImage("{'descr': [('a', '<f8')], 'fortran_order': False, 'shape': (2,), }", 64);
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(bytes, where), plaudit::Error, IsError(ExitCode::kBadData, {where}));
  }
  SECTION("unknown format version") {
    std::string bytes = good;
    bytes[6] = '\x04';
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(bytes, where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "version 4.0"}));
  }
  SECTION("header without a shape") {
    const auto bytes = NpyImage("{'descr': '<f8', 'fortran_order': False, }", 64);
    REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpy(bytes, where), plaudit::Error,
                           IsError(ExitCode::kBadData, {where, "shape"}));
  }
}

TEST_CASE("a header declaring 10^10 elements in a 1 kB file is refused from the header alone", "[io][npy]") {
  TempDir dir("npy");
  const auto image = NpyImage("{'descr': '<f8', 'fortran_order': False, 'shape': (100000, 100000), }", 1024 - 128);
  REQUIRE(image.size() == 1024);
  const auto path = dir.Write("huge.npy", image);
  // The message reports the declared size against what the file holds: the check ran on the
  // header, before the 80 GB payload buffer could have been requested.
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpyFile(path), plaudit::Error,
                         IsError(ExitCode::kBadData, {path.string(), "10000000000 elements", "80000000000 bytes",
                                                      "only 896 bytes"}));
  // ParseNpyHeader alone gives the same verdict when told how much the source holds.
  REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpyHeader(image.substr(0, 128), 1024, "huge.npy"), plaudit::Error,
                         IsError(ExitCode::kBadData, {"huge.npy", "10000000000 elements"}));
}

TEST_CASE("a missing NPY file is kMissing and names the path", "[io][npy]") {
  const std::string path = kNpyDir + "no-such-array.npy";
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpyFile(path), plaudit::Error, IsError(ExitCode::kMissing, {path}));
}

TEST_CASE("EncodeNpy output decodes to the same array", "[io][npy]") {
  NdArray a;
  a.dtype = DType::kF8;
  a.shape = {2, 1, 3};
  a.values = {1.5, -0.0, 1e-310, 3.0, -7.25, 1e300};
  const NdArray back = plaudit::io::ParseNpy(plaudit::io::EncodeNpy(a), "encoded");
  CHECK(back.dtype == DType::kF8);
  CHECK(back.shape == a.shape);
  CHECK(back.values == a.values);
  CHECK(std::signbit(back.values[1]));

  NdArray labels;
  labels.dtype = DType::kI4;
  labels.shape = {4};
  labels.values = {0, 2, -1, 2147483647};
  const NdArray lb = plaudit::io::ParseNpy(plaudit::io::EncodeNpy(labels), "encoded");
  CHECK(plaudit::io::IsInteger(lb.dtype));  // integers stay integers (written as <i8)
  CHECK(lb.values == labels.values);

  NdArray scalar;
  scalar.shape = {};
  scalar.values = {42.0};
  const NdArray sb = plaudit::io::ParseNpy(plaudit::io::EncodeNpy(scalar), "encoded");
  CHECK(sb.shape.empty());
  CHECK(sb.values == std::vector<double>{42.0});
  // NumPy aligns the payload to 64 bytes (numpy/lib/format.py, ARRAY_ALIGN = 64).
  CHECK(plaudit::io::EncodeNpy(scalar).size() % 64 == 8);
}
