#include "plaudit/model/loss.h"

#include <cmath>

namespace plaudit::model {
namespace {

// log(1 + exp(v)) without overflow.
inline Eigen::ArrayXXd Softplus(const Eigen::ArrayXXd& v) { return v.max(0.0) + (-v.abs()).exp().log1p(); }

Eigen::VectorXd LogSumExp(const Eigen::MatrixXd& o) {
  const Eigen::VectorXd m = o.rowwise().maxCoeff();
  return m.array() + (o.colwise() - m).array().exp().rowwise().sum().log();
}

Eigen::VectorXd PickLabels(const Eigen::MatrixXd& o, const Eigen::MatrixXd& target) {
  Eigen::VectorXd picked(o.rows());
  for (Eigen::Index i = 0; i < o.rows(); ++i) picked(i) = o(i, static_cast<Eigen::Index>(target(i, 0)));
  return picked;
}

}  // namespace

const char* LossToString(Loss loss) {
  switch (loss) {
    case Loss::kSquared: return "squared";
    case Loss::kCrossEntropy: return "cross-entropy";
    case Loss::kLogistic: return "logistic";
  }
  return "?";
}

std::optional<Loss> LossFromString(const std::string& name) {
  if (name == "squared") return Loss::kSquared;
  if (name == "cross-entropy") return Loss::kCrossEntropy;
  if (name == "logistic") return Loss::kLogistic;
  return std::nullopt;
}

Eigen::VectorXd LossPerRow(Loss loss, const Eigen::MatrixXd& output, const Eigen::MatrixXd& target) {
  switch (loss) {
    case Loss::kSquared: return 0.5 * (output - target).rowwise().squaredNorm();
    case Loss::kCrossEntropy: return LogSumExp(output) - PickLabels(output, target);
    case Loss::kLogistic: {
      // softplus(o) - y*o, the binary cross-entropy of sigmoid(o) against y.
      const Eigen::ArrayXXd o = output.col(0).array();
      return (Softplus(o) - target.col(0).array() * o).matrix();
    }
  }
  return {};
}

double LossSum(Loss loss, const Eigen::MatrixXd& output, const Eigen::MatrixXd& target) {
  return LossPerRow(loss, output, target).sum();
}

void LossGradient(Loss loss, const Eigen::MatrixXd& output, const Eigen::MatrixXd& target, Eigen::MatrixXd& grad) {
  switch (loss) {
    case Loss::kSquared:
      grad = output - target;
      break;
    case Loss::kCrossEntropy: {
      const Eigen::VectorXd lse = LogSumExp(output);
      grad = (output.colwise() - lse).array().exp().matrix();
      for (Eigen::Index i = 0; i < output.rows(); ++i) grad(i, static_cast<Eigen::Index>(target(i, 0))) -= 1.0;
      break;
    }
    case Loss::kLogistic:
      grad = (0.5 * ((0.5 * output.array()).tanh() + 1.0) - target.array()).matrix();
      break;
  }
}

}  // namespace plaudit::model
