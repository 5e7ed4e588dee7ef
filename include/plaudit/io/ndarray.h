#pragma once
// An n-dimensional array as read from an NPY member: shape plus values in C (row-major) order.
// Values are held as double whatever the stored dtype; the dtype is kept so that readers can
// insist on integer labels and so that writers can round-trip.
#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include <Eigen/Core>

namespace plaudit::io {

enum class DType { kF4, kF8, kI4, kI8, kU1, kB1 };

const char* DTypeToString(DType dtype);  // "<f4", "<f8", ... (little-endian spelling)
bool IsInteger(DType dtype);             // i4, i8, u1, b1

using RowMatrix = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

struct NdArray {
  DType dtype = DType::kF8;
  std::vector<std::int64_t> shape;
  std::vector<double> values;  // C order, size() == product of shape

  std::int64_t size() const;
  int ndim() const { return static_cast<int>(shape.size()); }
  std::string ShapeString() const;  // "(3, 4)" as NumPy prints it

  // The array as a rows x cols matrix: 2-D as is, 1-D as a column, 0-D as 1x1.
  // Throws Error(kBadData) naming `where` for 3-D and higher.
  Eigen::MatrixXd AsMatrix(const std::string& where) const;
};

NdArray MakeArray(const Eigen::MatrixXd& matrix);                   // 2-D, f8
NdArray MakeVector(const Eigen::VectorXd& vector);                  // 1-D, f8

using ArrayMap = std::map<std::string, NdArray>;

}  // namespace plaudit::io
