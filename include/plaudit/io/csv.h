#pragma once
// Training data from a CSV file: a header row naming the columns, then one numeric row per
// sample. Fields may be double-quoted (RFC 4180, within one line); a leading UTF-8 byte-order
// mark and blank lines are ignored. Every selected cell must parse completely as a finite
// number: errors (kBadData) name the file, the line and the column, e.g.
//   data.csv: line 17, column 'temp': 'abc' is not a number
#include <filesystem>
#include <string>
#include <vector>

#include <Eigen/Core>

namespace plaudit::io {

struct CsvSelection {
  // Target columns, in this order; empty: the last column.
  std::vector<std::string> targets;
  // Input columns, in this order; empty: every column that is not a target.
  std::vector<std::string> inputs;
};

struct CsvData {
  Eigen::MatrixXd x;  // N x d
  Eigen::MatrixXd y;  // N x k
  std::vector<std::string> input_names;
  std::vector<std::string> target_names;
};

// Read and split into inputs and targets. Columns that are neither are not parsed.
// kMissing when the file is absent; kBadData for an empty file, a missing named column, a
// duplicate header name, a row with the wrong number of fields, or a bad cell.
CsvData ReadCsv(const std::filesystem::path& path, const CsvSelection& selection = {});

// Write a header row and the values (17 significant digits, so values read back exactly).
void WriteCsv(const std::filesystem::path& path, const std::vector<std::string>& columns,
              const Eigen::MatrixXd& values);

}  // namespace plaudit::io
