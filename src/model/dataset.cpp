#include "plaudit/model/dataset.h"

#include <algorithm>
#include <cmath>
#include <numeric>

#include "plaudit/core/error.h"
#include "plaudit/io/npz.h"

namespace plaudit::model {
namespace {

void RequireFinite(const Eigen::MatrixXd& m, const char* name, const std::string& file) {
  if (m.allFinite()) return;
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      if (!std::isfinite(m(i, j))) {
        raise(ExitCode::kBadData, "{}: array '{}' holds a non-finite value ({}) at row {}, column {}", file, name,
              m(i, j), i, j);
      }
    }
  }
}

double Entropy(const Eigen::VectorXd& p) {
  double h = 0.0;
  for (Eigen::Index i = 0; i < p.size(); ++i) if (p(i) > 0.0) h -= p(i) * std::log(p(i));
  return h;
}

}  // namespace

void ValidateDataset(const Dataset& data, Loss loss, Eigen::Index classes, const std::string& file) {
  if (data.x.rows() == 0) raise(ExitCode::kBadData, "{}: array 'x' has no rows", file);
  if (data.x.rows() != data.y.rows()) {
    raise(ExitCode::kBadData, "{}: 'x' has {} rows but 'y' has {}", file, data.x.rows(), data.y.rows());
  }
  RequireFinite(data.x, "x", file);
  RequireFinite(data.y, "y", file);
  if (loss == Loss::kSquared) {
    if (classes > 0 && data.y.cols() != classes) {
      raise(ExitCode::kBadData, "{}: 'y' has {} columns but the network has {} outputs", file, data.y.cols(), classes);
    }
    return;
  }
  if (data.y.cols() != 1) {
    raise(ExitCode::kBadData, "{}: 'y' must be one label per row for the {} loss, found {} columns", file,
          LossToString(loss), data.y.cols());
  }
  const double top = loss == Loss::kLogistic ? 1.0 : static_cast<double>(classes - 1);
  if (loss == Loss::kLogistic && classes > 0 && classes != 1) {
    raise(ExitCode::kBadData, "{}: the logistic loss needs a network with 1 output, found {}", file, classes);
  }
  for (Eigen::Index i = 0; i < data.y.rows(); ++i) {
    const double v = data.y(i, 0);
    if (v != std::floor(v) || v < 0.0 || (classes > 0 && v > top)) {
      raise(ExitCode::kBadData, "{}: label {} at row {} is out of range for the {} loss (expected an integer in 0..{})",
            file, v, i, LossToString(loss), static_cast<long long>(top));
    }
  }
}

Dataset ReadDataset(const std::filesystem::path& path, Loss loss, Eigen::Index classes) {
  const io::ArrayMap arrays = io::ReadNpz(path);
  const std::string file = path.string();
  for (const char* name : {"x", "y"}) {
    if (!arrays.count(name)) raise(ExitCode::kBadData, "{}: array '{}' is missing (the audit data need 'x' and 'y')", file, name);
  }
  const io::NdArray& x = arrays.at("x");
  const io::NdArray& y = arrays.at("y");
  if (x.ndim() != 2) raise(ExitCode::kBadData, "{}: 'x' must have shape (N, d), found {}", file, x.ShapeString());
  if (y.ndim() < 1 || y.ndim() > 2) raise(ExitCode::kBadData, "{}: 'y' must have shape (N,) or (N, k), found {}", file, y.ShapeString());
  Dataset data;
  data.x = x.AsMatrix(file + " (array 'x')");
  data.y = y.AsMatrix(file + " (array 'y')");
  ValidateDataset(data, loss, classes, file);
  return data;
}

Dataset Subsample(const Dataset& data, Eigen::Index max_rows, std::uint64_t seed) {
  if (max_rows <= 0 || data.rows() <= max_rows) return data;
  std::vector<Eigen::Index> index(static_cast<std::size_t>(data.rows()));
  std::iota(index.begin(), index.end(), Eigen::Index{0});
  std::mt19937_64 rng(seed);
  // Partial Fisher-Yates: the first max_rows entries are a uniform sample without replacement.
  for (Eigen::Index i = 0; i < max_rows; ++i) {
    std::uniform_int_distribution<Eigen::Index> pick(i, data.rows() - 1);
    std::swap(index[static_cast<std::size_t>(i)], index[static_cast<std::size_t>(pick(rng))]);
  }
  index.resize(static_cast<std::size_t>(max_rows));
  std::sort(index.begin(), index.end());
  Dataset out;
  out.x = data.x(index, Eigen::all);
  out.y = data.y(index, Eigen::all);
  return out;
}

double ConstantBaselineLoss(const Dataset& data, Loss loss, Eigen::Index classes) {
  const double n = static_cast<double>(data.rows());
  switch (loss) {
    case Loss::kSquared: {
      const Eigen::RowVectorXd mean = data.y.colwise().mean();
      return 0.5 * (data.y.rowwise() - mean).squaredNorm() / n;
    }
    case Loss::kCrossEntropy: {
      Eigen::VectorXd freq = Eigen::VectorXd::Zero(std::max<Eigen::Index>(classes, 1));
      for (Eigen::Index i = 0; i < data.rows(); ++i) freq(static_cast<Eigen::Index>(data.y(i, 0))) += 1.0;
      return Entropy(freq / n);
    }
    case Loss::kLogistic: {
      const double p = data.y.col(0).mean();
      return Entropy(Eigen::Vector2d(p, 1.0 - p));
    }
  }
  return 0.0;
}

}  // namespace plaudit::model
