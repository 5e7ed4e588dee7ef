#include "plaudit/io/ndarray.h"

#include <fmt/format.h>

#include "plaudit/core/error.h"

namespace plaudit::io {

const char* DTypeToString(DType dtype) {
  switch (dtype) {
    case DType::kF4: return "<f4";
    case DType::kF8: return "<f8";
    case DType::kI4: return "<i4";
    case DType::kI8: return "<i8";
    case DType::kU1: return "|u1";
    case DType::kB1: return "|b1";
  }
  return "?";
}

bool IsInteger(DType dtype) { return dtype != DType::kF4 && dtype != DType::kF8; }

std::int64_t NdArray::size() const {
  std::int64_t n = 1;
  for (auto s : shape) n *= s;
  return n;
}

std::string NdArray::ShapeString() const {
  if (shape.empty()) return "()";
  if (shape.size() == 1) return fmt::format("({},)", shape[0]);
  return fmt::format("({})", fmt::join(shape, ", "));
}

Eigen::MatrixXd NdArray::AsMatrix(const std::string& where) const {
  if (ndim() > 2) {
    raise(ExitCode::kBadData, "{}: expected a 1-D or 2-D array, found shape {}", where, ShapeString());
  }
  const Eigen::Index rows = ndim() == 0 ? 1 : static_cast<Eigen::Index>(shape[0]);
  const Eigen::Index cols = ndim() == 2 ? static_cast<Eigen::Index>(shape[1]) : 1;
  return Eigen::Map<const RowMatrix>(values.data(), rows, cols);
}

NdArray MakeArray(const Eigen::MatrixXd& matrix) {
  NdArray a;
  a.shape = {matrix.rows(), matrix.cols()};
  a.values.resize(static_cast<std::size_t>(matrix.size()));
  Eigen::Map<RowMatrix>(a.values.data(), matrix.rows(), matrix.cols()) = matrix;
  return a;
}

NdArray MakeVector(const Eigen::VectorXd& vector) {
  NdArray a;
  a.shape = {vector.size()};
  a.values.assign(vector.data(), vector.data() + vector.size());
  return a;
}

}  // namespace plaudit::io
