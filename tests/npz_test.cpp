// The NPZ reader against archives numpy.savez / numpy.savez_compressed wrote
// (tests/reference/make_npy_fixtures.py, expectations in tests/fixtures/npy/expected.json),
// against damaged archives, and WriteNpz round trips.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <string>

#include <Eigen/Core>
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/npz.h"
#include "support/error_matcher.h"
#include "support/temp_dir.h"

namespace {

using plaudit::ExitCode;
using plaudit::io::ArrayMap;
using plaudit::io::DType;
using plaudit::io::NdArray;
using plaudit::testing::IsError;
using plaudit::testing::ReadBytes;
using plaudit::testing::TempDir;

const std::string kNpyDir = std::string(PLAUDIT_FIXTURES) + "/npy/";

nlohmann::json ExpectedArchives() {
  std::ifstream in(kNpyDir + "expected.json");
  REQUIRE(in);
  return nlohmann::json::parse(in).at("npz");
}

void CheckMember(const NdArray& a, const nlohmann::json& want) {
  CHECK(a.shape == want.at("shape").get<std::vector<std::int64_t>>());
  if (want.contains("arange")) {
    // np.arange(count) * step + start (exact in binary: step is 0.25).
    const auto& rule = want.at("arange");
    const double start = rule.at("start").get<double>();
    const double step = rule.at("step").get<double>();
    REQUIRE(a.values.size() == rule.at("count").get<std::size_t>());
    for (std::size_t i = 0; i < a.values.size(); ++i) {
      if (a.values[i] != static_cast<double>(i) * step + start) FAIL("element " << i << " is " << a.values[i]);
    }
    return;
  }
  const auto values = want.at("values").get<std::vector<double>>();
  CHECK(a.values == values);
}

}  // namespace

TEST_CASE("numpy.savez and numpy.savez_compressed archives read member by member", "[io][npz]") {
  const auto archives = ExpectedArchives();
  for (const char* file : {"savez_plain.npz", "savez_compressed.npz"}) {
    INFO(file);
    const auto& want = archives.at(file);
    // The generator checked that NumPy wrote a zip64 extra field for every member and that
    // the large member exceeds the reader's 64 KiB first read.
    for (const auto& [member, zip] : want.at("zip").items()) CHECK(zip.at("zip64_local_extra").get<bool>());
    CHECK(want.at("zip").at("large.npy").at("file_size").get<int>() > 65536);

    const ArrayMap arrays = plaudit::io::ReadNpz(kNpyDir + file);
    REQUIRE(arrays.size() == want.at("members").size());
    for (const auto& [name, member] : want.at("members").items()) {
      INFO("member " << name);
      REQUIRE(arrays.count(name) == 1);
      CheckMember(arrays.at(name), member);
    }
    CHECK(arrays.at("labels").dtype == DType::kI8);
    CHECK(arrays.at("mask").dtype == DType::kB1);
    CHECK(arrays.count("grad/fc1.weight") == 1);  // names keep their slashes, lose ".npy"
  }
}

TEST_CASE("ListNpz names the members as numpy.load does", "[io][npz]") {
  auto names = plaudit::io::ListNpz(kNpyDir + "savez_compressed.npz");
  std::sort(names.begin(), names.end());
  CHECK(names == std::vector<std::string>{"grad/fc1.weight", "labels", "large", "mask", "weights"});
}

TEST_CASE("damaged or absent archives fail with the file named", "[io][npz]") {
  TempDir dir("npz");
  SECTION("an archive cut in half") {
    for (const char* file : {"savez_plain.npz", "savez_compressed.npz"}) {
      const std::string bytes = ReadBytes(kNpyDir + file);
      const auto path = dir.Write(std::string("half-") + file, bytes.substr(0, bytes.size() / 2));
      REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error, IsError(ExitCode::kBadData, {path.string()}));
      REQUIRE_THROWS_MATCHES(plaudit::io::ListNpz(path), plaudit::Error, IsError(ExitCode::kBadData, {path.string()}));
    }
  }
  SECTION("a member that is not an NPY image") {
    const std::string path = kNpyDir + "member_not_npy.npz";
    REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error,
                           IsError(ExitCode::kBadData, {path, "member 'notes'", "magic"}));
  }
  SECTION("a member whose header declares 10^10 elements over 1 KiB") {
    const std::string path = kNpyDir + "member_huge_header.npz";
    REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error,
                           IsError(ExitCode::kBadData, {path, "member 'huge'", "10000000000 elements"}));
  }
  SECTION("a file that is not a zip at all") {
    const auto path = dir.Write("text.npz", "just some text, no zip directory\n");
    REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error, IsError(ExitCode::kBadData, {path.string()}));
  }
  SECTION("an empty file") {
    const auto path = dir.Write("empty.npz", "");
    REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error, IsError(ExitCode::kBadData, {path.string()}));
  }
  SECTION("a missing file") {
    const auto path = dir / "absent.npz";
    REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error, IsError(ExitCode::kMissing, {path.string()}));
  }
  SECTION("a directory") {
    REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(dir.path()), plaudit::Error,
                           IsError(ExitCode::kBadData, {dir.path().string()}));
  }
}

TEST_CASE("WriteNpz round-trips every array and leaves no temporary file", "[io][npz]") {
  TempDir dir("npz");
  ArrayMap arrays;
  arrays["fc1.weight"] = plaudit::io::MakeArray((Eigen::MatrixXd(2, 3) << 1, -2, 3.5, 0, 1e-300, -7).finished());
  arrays["fc1.bias"] = plaudit::io::MakeVector(Eigen::Vector2d(0.25, -0.5));
  NdArray labels;
  labels.dtype = DType::kI8;
  labels.shape = {5};
  labels.values = {0, 1, 2, 1, 0};
  arrays["y"] = labels;
  NdArray cube;
  cube.shape = {2, 2, 2};
  cube.values = {1, 2, 3, 4, 5, 6, 7, 8};
  arrays["grad/cube"] = cube;
  NdArray none;
  none.shape = {0, 4};
  arrays["empty"] = none;

  const auto path = dir / "step-3.npz";
  plaudit::io::WriteNpz(path, arrays);
  CHECK_FALSE(std::filesystem::exists(path.string() + ".tmp"));
  const ArrayMap back = plaudit::io::ReadNpz(path);
  REQUIRE(back.size() == arrays.size());
  for (const auto& [name, a] : arrays) {
    INFO(name);
    REQUIRE(back.count(name) == 1);
    CHECK(back.at(name).shape == a.shape);
    CHECK(back.at(name).values == a.values);
    CHECK(plaudit::io::IsInteger(back.at(name).dtype) == plaudit::io::IsInteger(a.dtype));
  }

  // Writing again replaces the archive rather than adding to it.
  arrays.erase("grad/cube");
  plaudit::io::WriteNpz(path, arrays);
  CHECK(plaudit::io::ReadNpz(path).size() == arrays.size());
}
