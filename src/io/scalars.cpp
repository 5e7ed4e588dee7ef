#include "plaudit/io/scalars.h"

#include <cmath>
#include <fstream>
#include <optional>

#include <nlohmann/json.hpp>

#include "plaudit/core/error.h"

namespace plaudit::io {
namespace {

// nullopt when the line is not a usable record; `why` says what is wrong.
std::optional<ScalarRecord> ParseLine(const std::string& line, std::string& why) {
  const auto j = nlohmann::json::parse(line, nullptr, /*allow_exceptions=*/false);
  if (j.is_discarded()) { why = "is not valid JSON"; return std::nullopt; }
  if (!j.is_object()) { why = "is not a JSON object"; return std::nullopt; }
  const auto step = j.find("step");
  if (step == j.end()) { why = "has no 'step'"; return std::nullopt; }
  if (!step->is_number_integer() || step->get<std::int64_t>() < 0) { why = "has a 'step' that is not a non-negative integer"; return std::nullopt; }
  const auto loss = j.find("loss");
  if (loss == j.end()) { why = "has no 'loss'"; return std::nullopt; }
  ScalarRecord r;
  r.step = step->get<std::int64_t>();
  // A non-finite loss is data (the run diverged), written by Python's json as NaN/Infinity strings or null.
  if (loss->is_number()) r.loss = loss->get<double>();
  else if (loss->is_null()) r.loss = std::nan("");
  else if (loss->is_string() && (*loss == "NaN" || *loss == "nan")) r.loss = std::nan("");
  else if (loss->is_string() && (*loss == "Infinity" || *loss == "inf")) r.loss = INFINITY;
  else if (loss->is_string() && (*loss == "-Infinity" || *loss == "-inf")) r.loss = -INFINITY;
  else { why = "has a 'loss' that is not a number"; return std::nullopt; }
  for (const auto& [key, value] : j.items()) {
    if (key != "step" && key != "loss" && value.is_number()) r.extra[key] = value.get<double>();
  }
  return r;
}

// nlohmann rejects NaN/Infinity literals, which Python's json.dumps writes; quote them first.
std::string QuoteNonFinite(const std::string& line) {
  std::string out;
  out.reserve(line.size());
  bool in_string = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (c == '"' && (i == 0 || line[i - 1] != '\\')) in_string = !in_string;
    if (!in_string) {
      for (const char* word : {"-Infinity", "Infinity", "NaN"}) {
        const std::size_t len = std::char_traits<char>::length(word);
        if (line.compare(i, len, word) == 0) {
          out += fmt::format("\"{}\"", word);
          i += len - 1;
          goto next;
        }
      }
    }
    out.push_back(c);
  next:;
  }
  return out;
}

}  // namespace

ScalarLog ParseScalars(const std::string& text, const std::string& file, std::int64_t first_line_number) {
  ScalarLog log;
  std::size_t pos = 0;
  std::int64_t line_no = first_line_number;
  while (pos < text.size()) {
    const std::size_t nl = text.find('\n', pos);
    const bool complete = nl != std::string::npos;
    std::string line = text.substr(pos, complete ? nl - pos : std::string::npos);
    if (!line.empty() && line.back() == '\r') line.pop_back();
    std::string why;
    const bool blank = line.find_first_not_of(" \t") == std::string::npos;
    const auto record = blank ? std::nullopt : ParseLine(QuoteNonFinite(line), why);
    if (!complete) {
      // Still being written: keep it for the next read if it does not parse yet.
      if (record) {
        log.records.push_back(*record);
        log.consumed_bytes = text.size();
      } else if (!blank) {
        log.skipped_partial_line = true;
      }
      break;
    }
    if (!blank && !record) raise(ExitCode::kBadData, "{}: line {} {}", file, line_no, why);
    if (record) log.records.push_back(*record);
    pos = nl + 1;
    log.consumed_bytes = pos;
    ++line_no;
  }
  return log;
}

ScalarLog ReadScalars(const std::filesystem::path& path, std::uint64_t offset) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return {};
  in.seekg(static_cast<std::streamoff>(offset));
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  ScalarLog log = ParseScalars(text, path.string());
  log.consumed_bytes += offset;
  return log;
}

}  // namespace plaudit::io
