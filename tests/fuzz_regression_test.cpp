// Inputs the fuzz targets (fuzz/, scripts/fuzz.sh) or their seed corpus showed the readers
// mishandling, kept in tests/fixtures/fuzz/. Each must now be rejected with plaudit::Error and
// the contract's exit status for malformed input (../shared/run-format.md, section 5: 65 bad
// input data), never a crash, another exception type or a huge allocation.
#include <string>

#include <catch2/catch.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/manifest.h"
#include "plaudit/io/npz.h"
#include "support/error_matcher.h"
#include "support/temp_dir.h"

namespace {

using plaudit::ExitCode;
using plaudit::testing::IsError;
using plaudit::testing::ReadBytes;

const std::string kFuzzDir = std::string(PLAUDIT_FIXTURES) + "/fuzz/";

// fuzz_manifest, first minutes: "multiplier": 2e+308 is valid JSON grammar but beyond double
// range, and nlohmann::json throws out_of_range (406) for it rather than parse_error; that
// escaped ParseManifest and ended the process through std::terminate.
TEST_CASE("a manifest number beyond double range is bad data, not an escaped json exception", "[io][manifest][fuzz]") {
  const std::string path = kFuzzDir + "manifest_number_overflow.json";
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadManifest(path), plaudit::Error,
                         IsError(ExitCode::kBadData, {path, "not valid JSON", "2e+308"}));
  REQUIRE_THROWS_MATCHES(plaudit::io::ParseManifest(R"({"format": 1e999})", "run.json"), plaudit::Error,
                         IsError(ExitCode::kBadData, {"run.json", "not valid JSON"}));
}

// fuzz/make_corpus.py, zip64_claims_10gb.npz (379 bytes): zip64 fields claim 10 GiB from
// 10 MiB of deflate data, inside the 1:1100 ratio the reader allows, and the member's NPY
// header declares 10 GiB too; libzip does not check the claim against the file, so the reader
// sized its buffer to 10 GiB before the short read failed (fuzz_npz: out-of-memory,
// malloc(10737418369)). The compressed size is now bounded by the archive's real size.
TEST_CASE("a zip directory claiming 10 GiB in a 379-byte archive is rejected before allocating", "[io][npz][fuzz]") {
  const std::string path = kFuzzDir + "npz_zip64_claims_10gb.npz";
  const std::string bytes = ReadBytes(path);
  REQUIRE(bytes.size() == 379);
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error,
                         IsError(ExitCode::kBadData, {path, "member 'x'", "10485760 compressed bytes", "holds only 379"}));
  REQUIRE_THROWS_MATCHES(plaudit::io::ParseNpz(bytes, "claims.npz"), plaudit::Error,
                         IsError(ExitCode::kBadData, {"claims.npz", "holds only 379"}));
}

// fuzz/make_corpus.py, duplicate_stems.npz: members 'x.npy' and 'x' both name array 'x' (numpy.load
// strips '.npy', so it too sees one name twice). The reader kept whichever came last, silently.
TEST_CASE("an archive holding one array name twice is rejected, naming the array", "[io][npz][fuzz]") {
  const std::string path = kFuzzDir + "npz_duplicate_stems.npz";
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error,
                         IsError(ExitCode::kBadData, {path, "array 'x'", "stored twice"}));
}

// fuzz/make_corpus.py, deflate_claims_1000x: 205 123 bytes of honest deflate (random bytes do not
// compress) inside zip64 fields and an NPY header claiming 1000 times that, within the 1:1100
// ratio deflate allows (zlib's technical notes give about 1032:1 as deflate's limit; from memory).
// The reader used to size its buffer to the claim (about 200 MB) before reading; it now grows the
// buffer as bytes inflate and fails at the real end of the stream. The CLI test "an archive's
// size claim ..." checks the allocation under a memory cap.
TEST_CASE("a deflated member claiming 1000x its stream fails at the real end of the stream", "[io][npz][fuzz]") {
  const std::string path = kFuzzDir + "npz_deflate_claims_1000x.npz";
  REQUIRE(ReadBytes(path).size() == 205123);
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error,
                         IsError(ExitCode::kBadData, {path, "member 'x'", "truncated or corrupt", "inflated"}));
}

// fuzz/make_corpus.py: a stored member of 160 bytes whose local header and directory both
// claim 224. An uncompressed member's size is its compressed size (APPNOTE.TXT 4.4.8, 4.4.9:
// method 0 stores the data as is), so the claim is refused before the member is read.
TEST_CASE("a stored member claiming more bytes than it occupies is refused", "[io][npz][fuzz]") {
  const std::string path = kFuzzDir + "npz_stored_size_lies.npz";
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadNpz(path), plaudit::Error,
                         IsError(ExitCode::kBadData, {path, "member 'x'", "stored member claims 224 bytes but occupies 160"}));
}

// Not a finding: fuzz_npz reads through ParseNpz, so it must read what ReadNpz reads.
TEST_CASE("ParseNpz on an archive's bytes reads what ReadNpz reads from its file", "[io][npz][fuzz]") {
  // numpy.savez_compressed output (tests/reference/make_npy_fixtures.py).
  const std::string path = std::string(PLAUDIT_FIXTURES) + "/npy/savez_compressed.npz";
  const auto from_file = plaudit::io::ReadNpz(path);
  const auto from_bytes = plaudit::io::ParseNpz(ReadBytes(path), path);
  REQUIRE(from_file.size() == from_bytes.size());
  REQUIRE(!from_file.empty());
  for (const auto& [name, array] : from_file) {
    REQUIRE(from_bytes.count(name) == 1);
    CHECK(from_bytes.at(name).shape == array.shape);
    CHECK(from_bytes.at(name).dtype == array.dtype);
    CHECK(from_bytes.at(name).values == array.values);  // NaN-free fixture members
  }
}

}  // namespace
