#include "plaudit/io/csv.h"

#include <charconv>
#include <cmath>
#include <fstream>
#include <map>
#include <set>

#include <fmt/format.h>

#include "plaudit/core/error.h"
#include "plaudit/io/ndarray.h"

namespace plaudit::io {
namespace {

struct Source {
  std::string file;
  std::int64_t line = 0;
};

std::string Trim(const std::string& s) {
  const auto first = s.find_first_not_of(" \t");
  if (first == std::string::npos) return "";
  return s.substr(first, s.find_last_not_of(" \t") - first + 1);
}

bool IsBlank(const std::string& s) { return s.find_first_not_of(" \t") == std::string::npos; }

// RFC 4180 fields of one line: a field starting with '"' runs to the closing quote, "" is a quote.
std::vector<std::string> SplitFields(const std::string& line, const Source& src) {
  std::vector<std::string> fields;
  std::string cur;
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c != '"') cur += c;
      else if (i + 1 < line.size() && line[i + 1] == '"') cur += line[++i];
      else quoted = false;
    } else if (c == ',') {
      fields.push_back(cur);
      cur.clear();
    } else if (c == '"' && IsBlank(cur)) {
      quoted = true;
      cur.clear();
    } else {
      cur += c;
    }
  }
  if (quoted) {
    raise(ExitCode::kBadData, "{}: line {}: unterminated quoted field (quoted fields cannot span lines)", src.file,
          src.line);
  }
  fields.push_back(cur);
  return fields;
}

double ParseCell(const std::string& raw, const Source& src, const std::string& column) {
  const std::string cell = Trim(raw);
  if (cell.empty()) raise(ExitCode::kBadData, "{}: line {}, column '{}': empty cell", src.file, src.line, column);
  // from_chars is locale-independent but refuses the leading '+' that spreadsheets write.
  const bool plus = cell[0] == '+' && cell.size() > 1 && cell[1] != '-' && cell[1] != '+';
  const char* begin = cell.data() + (plus ? 1 : 0);
  const char* end = cell.data() + cell.size();
  double v = 0.0;
  const auto [ptr, ec] = std::from_chars(begin, end, v);
  if (ec == std::errc::result_out_of_range) {
    raise(ExitCode::kBadData, "{}: line {}, column '{}': '{}' is out of range", src.file, src.line, column, cell);
  }
  if (ec != std::errc() || ptr != end) {
    raise(ExitCode::kBadData, "{}: line {}, column '{}': '{}' is not a number", src.file, src.line, column, cell);
  }
  if (!std::isfinite(v)) {
    raise(ExitCode::kBadData, "{}: line {}, column '{}': '{}' is not a finite number", src.file, src.line, column, cell);
  }
  return v;
}

std::string ReadAll(const std::filesystem::path& path) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) raise(ExitCode::kMissing, "{}: file not found", path.string());
  if (std::filesystem::is_directory(path, ec)) raise(ExitCode::kBadData, "{}: is a directory, expected a CSV file", path.string());
  std::ifstream in(path, std::ios::binary);
  if (!in) raise(ExitCode::kMissing, "{}: cannot open", path.string());
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  if (text.compare(0, 3, "\xEF\xBB\xBF") == 0) text.erase(0, 3);
  return text;
}

// Physical lines with their 1-based numbers; '\r' of CRLF files removed.
std::vector<std::pair<std::int64_t, std::string>> Lines(const std::string& text) {
  std::vector<std::pair<std::int64_t, std::string>> lines;
  std::size_t pos = 0;
  std::int64_t number = 1;
  while (pos < text.size()) {
    std::size_t nl = text.find('\n', pos);
    if (nl == std::string::npos) nl = text.size();
    std::string line = text.substr(pos, nl - pos);
    if (!line.empty() && line.back() == '\r') line.pop_back();
    lines.emplace_back(number++, std::move(line));
    pos = nl + 1;
  }
  return lines;
}

std::map<std::string, std::size_t> IndexHeader(const std::vector<std::string>& header, const Source& src) {
  std::map<std::string, std::size_t> index;
  for (std::size_t i = 0; i < header.size(); ++i) {
    if (header[i].empty()) raise(ExitCode::kBadData, "{}: line {}: column {} of the header has no name", src.file, src.line, i + 1);
    if (!index.emplace(header[i], i).second) {
      raise(ExitCode::kBadData, "{}: line {}: column name '{}' appears twice in the header", src.file, src.line, header[i]);
    }
  }
  return index;
}

std::vector<std::size_t> Resolve(const std::vector<std::string>& names, const std::map<std::string, std::size_t>& index,
                                 const std::vector<std::string>& header, const std::string& file) {
  std::vector<std::size_t> cols;
  for (const auto& n : names) {
    const auto it = index.find(n);
    if (it == index.end()) {
      raise(ExitCode::kBadData, "{}: no column '{}' (the header names: {})", file, n, fmt::join(header, ", "));
    }
    cols.push_back(it->second);
  }
  return cols;
}

Eigen::MatrixXd ToMatrix(const std::vector<double>& values, Eigen::Index cols) {
  const Eigen::Index rows = cols == 0 ? 0 : static_cast<Eigen::Index>(values.size()) / cols;
  return Eigen::Map<const RowMatrix>(values.data(), rows, cols);
}

std::string QuoteIfNeeded(const std::string& name) {
  if (name.find_first_of(",\"") == std::string::npos) return name;
  std::string out = "\"";
  for (char c : name) out += c == '"' ? std::string("\"\"") : std::string(1, c);
  return out + "\"";
}

}  // namespace

CsvData ReadCsv(const std::filesystem::path& path, const CsvSelection& sel) {
  Source src{path.string(), 0};
  const auto lines = Lines(ReadAll(path));
  std::size_t first = 0;
  while (first < lines.size() && IsBlank(lines[first].second)) ++first;
  if (first == lines.size()) raise(ExitCode::kBadData, "{}: empty file (expected a header row naming the columns)", src.file);
  src.line = lines[first].first;
  std::vector<std::string> header = SplitFields(lines[first].second, src);
  for (auto& h : header) h = Trim(h);
  const auto index = IndexHeader(header, src);

  CsvData out;
  out.target_names = sel.targets.empty() ? std::vector<std::string>{header.back()} : sel.targets;
  const std::set<std::string> targets(out.target_names.begin(), out.target_names.end());
  out.input_names = sel.inputs;
  if (out.input_names.empty()) {
    for (const auto& h : header) if (!targets.count(h)) out.input_names.push_back(h);
  }
  for (const auto& n : out.input_names) {
    if (targets.count(n)) raise(ExitCode::kBadData, "{}: column '{}' is named both as an input and as a target", src.file, n);
  }
  const auto y_cols = Resolve(out.target_names, index, header, src.file);
  const auto x_cols = Resolve(out.input_names, index, header, src.file);
  if (x_cols.empty()) raise(ExitCode::kBadData, "{}: no input columns are left besides the targets", src.file);

  std::vector<double> xs, ys;
  for (std::size_t i = first + 1; i < lines.size(); ++i) {
    if (IsBlank(lines[i].second)) continue;
    src.line = lines[i].first;
    const auto fields = SplitFields(lines[i].second, src);
    if (fields.size() != header.size()) {
      raise(ExitCode::kBadData, "{}: line {} has {} fields, the header has {}", src.file, src.line, fields.size(),
            header.size());
    }
    for (std::size_t c : x_cols) xs.push_back(ParseCell(fields[c], src, header[c]));
    for (std::size_t c : y_cols) ys.push_back(ParseCell(fields[c], src, header[c]));
  }
  if (ys.empty()) raise(ExitCode::kBadData, "{}: no data rows after the header", src.file);
  out.x = ToMatrix(xs, static_cast<Eigen::Index>(x_cols.size()));
  out.y = ToMatrix(ys, static_cast<Eigen::Index>(y_cols.size()));
  return out;
}

void WriteCsv(const std::filesystem::path& path, const std::vector<std::string>& columns, const Eigen::MatrixXd& values) {
  if (static_cast<Eigen::Index>(columns.size()) != values.cols()) {
    raise(ExitCode::kBadData, "{}: {} column names for {} columns", path.string(), columns.size(), values.cols());
  }
  std::string text;
  for (std::size_t j = 0; j < columns.size(); ++j) text += (j ? "," : "") + QuoteIfNeeded(columns[j]);
  text += '\n';
  for (Eigen::Index i = 0; i < values.rows(); ++i) {
    for (Eigen::Index j = 0; j < values.cols(); ++j) text += fmt::format("{}{:.17g}", j ? "," : "", values(i, j));
    text += '\n';
  }
  std::ofstream f(path, std::ios::binary | std::ios::trunc);
  f << text;
  if (!f.flush()) raise(ExitCode::kBadData, "{}: cannot write", path.string());
}

}  // namespace plaudit::io
