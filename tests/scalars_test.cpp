// scalars.jsonl (../shared/run-format.md, section 3): complete lines, extra fields, a growing
// file's unfinished last line, and refusals that give the line number.
#include <cmath>
#include <string>

#include <catch2/catch.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/scalars.h"
#include "support/error_matcher.h"
#include "support/temp_dir.h"

namespace {

using plaudit::ExitCode;
using plaudit::io::ParseScalars;
using plaudit::testing::IsError;

constexpr const char* kFile = "runs/alpha/scalars.jsonl";

}  // namespace

TEST_CASE("complete scalar lines parse with their extra numeric fields", "[io][scalars]") {
  const std::string text =
      "{\"step\": 0, \"loss\": 1.25, \"grad_norm\": 3.5, \"lr\": 0.1}\n"
      "{\"step\": 10, \"loss\": 0.5, \"phase\": \"warmup\"}\n"
      "\n"
      "{\"loss\": 0.25, \"step\": 20}\r\n";
  const auto log = ParseScalars(text, kFile);
  REQUIRE(log.records.size() == 3);
  CHECK(log.records[0].step == 0);
  CHECK(log.records[0].loss == 1.25);
  CHECK(log.records[0].extra.size() == 2);
  CHECK(log.records[0].extra.at("grad_norm") == 3.5);
  CHECK(log.records[0].extra.at("lr") == 0.1);
  CHECK(log.records[1].extra.empty());  // non-numeric fields are not kept
  CHECK(log.records[2].step == 20);
  CHECK(log.records[2].loss == 0.25);
  CHECK(log.consumed_bytes == text.size());
  CHECK_FALSE(log.skipped_partial_line);
}

TEST_CASE("an unfinished last line is left for the next read", "[io][scalars]") {
  const std::string complete = "{\"step\": 0, \"loss\": 2.0}\n{\"step\": 5, \"loss\": 1.5}\n";
  const std::string text = complete + "{\"step\": 10, \"lo";
  const auto log = ParseScalars(text, kFile);
  CHECK(log.records.size() == 2);
  CHECK(log.skipped_partial_line);
  CHECK(log.consumed_bytes == complete.size());  // resume at the start of the partial line

  // An unterminated line that already parses is a whole record.
  const auto whole = ParseScalars(complete + "{\"step\": 10, \"loss\": 1.0}", kFile);
  CHECK(whole.records.size() == 3);
  CHECK_FALSE(whole.skipped_partial_line);
}

TEST_CASE("a malformed complete line is an error giving its line number", "[io][scalars]") {
  const std::string head = "{\"step\": 0, \"loss\": 2.0}\n{\"step\": 1, \"loss\": 1.0}\n";
  const auto bad = [&](const std::string& line, const std::string& why) {
    INFO(line);
    REQUIRE_THROWS_MATCHES(ParseScalars(head + line + "\n", kFile), plaudit::Error,
                           IsError(ExitCode::kBadData, {kFile, "line 3", why}));
  };
  bad("{\"step\": 2, \"loss\": ", "JSON");
  bad("[2, 1.0]", "object");
  bad("{\"loss\": 1.0}", "step");
  bad("{\"step\": 2.5, \"loss\": 1.0}", "step");
  bad("{\"step\": -1, \"loss\": 1.0}", "step");
  bad("{\"step\": 2}", "loss");
  bad("{\"step\": 2, \"loss\": \"low\"}", "loss");
  // first_line_number shifts the count for a resumed read.
  REQUIRE_THROWS_MATCHES(ParseScalars("{\"step\": 2}\n", kFile, 41), plaudit::Error,
                         IsError(ExitCode::kBadData, {kFile, "line 41"}));
}

TEST_CASE("non-finite losses written by Python's json module are data", "[io][scalars]") {
  // json.dumps(float('nan')) == 'NaN' and json.dumps(float('inf')) == 'Infinity' (Python docs,
  // json module: "NaN, Infinity and -Infinity" are emitted unless allow_nan=False).
  const auto log = ParseScalars(
      "{\"step\": 3, \"loss\": NaN}\n{\"step\": 4, \"loss\": Infinity, \"note_NaN\": 1}\n"
      "{\"step\": 5, \"loss\": null}\n{\"step\": 6, \"loss\": -Infinity}\n",
      kFile);
  REQUIRE(log.records.size() == 4);
  CHECK(std::isnan(log.records[0].loss));
  CHECK(std::isinf(log.records[1].loss));
  CHECK(log.records[1].loss > 0.0);
  CHECK(log.records[1].extra.at("note_NaN") == 1.0);  // the word inside a key is left alone
  CHECK(std::isnan(log.records[2].loss));
  CHECK(std::isinf(log.records[3].loss));
  CHECK(log.records[3].loss < 0.0);  // -Infinity keeps its sign
}

TEST_CASE("ReadScalars resumes from an offset and treats an absent log as empty", "[io][scalars]") {
  plaudit::testing::TempDir dir("scalars");
  CHECK(plaudit::io::ReadScalars(dir / "scalars.jsonl").records.empty());

  const std::string first = "{\"step\": 0, \"loss\": 2.0}\n{\"step\": 1, \"loss\": 1.0}\n";
  const auto path = dir.Write("scalars.jsonl", first + "{\"step\": 2, ");
  const auto a = plaudit::io::ReadScalars(path);
  CHECK(a.records.size() == 2);
  CHECK(a.consumed_bytes == first.size());
  CHECK(a.skipped_partial_line);

  dir.Write("scalars.jsonl", first + "{\"step\": 2, \"loss\": 0.5}\n{\"step\": 3, \"loss\": 0.25}\n");
  const auto b = plaudit::io::ReadScalars(path, a.consumed_bytes);
  REQUIRE(b.records.size() == 2);
  CHECK(b.records[0].step == 2);
  CHECK(b.records[1].loss == 0.25);
  CHECK(b.consumed_bytes == plaudit::testing::ReadBytes(path).size());
}
