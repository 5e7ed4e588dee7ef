#pragma once
// scalars.jsonl: one JSON object a line with an integer `step`, a number `loss`, and any other
// numeric fields. The file may be growing while it is read, so an unterminated last line is
// left for the next read rather than treated as an error.
#include <cstdint>
#include <filesystem>
#include <map>
#include <string>
#include <vector>

namespace plaudit::io {

struct ScalarRecord {
  std::int64_t step = 0;
  double loss = 0.0;
  std::map<std::string, double> extra;  // other numeric fields, kept and shown
};

struct ScalarLog {
  std::vector<ScalarRecord> records;
  std::uint64_t consumed_bytes = 0;  // bytes of complete lines read; resume from here
  bool skipped_partial_line = false;
};

// Parse complete lines of `text`; `file` names the log in errors. A complete line that is not
// a JSON object with an integer step and a number loss is an error (kBadData) giving its line
// number; a final line without a newline that does not parse is skipped.
ScalarLog ParseScalars(const std::string& text, const std::string& file,
                       std::int64_t first_line_number = 1);

// Read the whole file (absent file: empty log). `offset` resumes a previous read.
ScalarLog ReadScalars(const std::filesystem::path& path, std::uint64_t offset = 0);

}  // namespace plaudit::io
