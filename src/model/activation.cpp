#include "plaudit/model/activation.h"

#include <cmath>

namespace plaudit::model {
namespace {

constexpr double kInvSqrt2 = 0.70710678118654752440;
constexpr double kInvSqrt2Pi = 0.39894228040143267794;

struct NamedActivation {
  Activation value;
  const char* name;
};
constexpr NamedActivation kNames[] = {
    {Activation::kIdentity, "identity"}, {Activation::kRelu, "relu"},       {Activation::kLeakyRelu, "leaky_relu"},
    {Activation::kTanh, "tanh"},         {Activation::kSigmoid, "sigmoid"}, {Activation::kSoftplus, "softplus"},
    {Activation::kGelu, "gelu"},
};

// sigmoid through tanh: no overflow for large |z|.
inline auto Sigmoid(const Eigen::ArrayXXd& z) { return 0.5 * ((0.5 * z).tanh() + 1.0); }

}  // namespace

const char* ActivationToString(Activation a) {
  for (const auto& n : kNames) if (n.value == a) return n.name;
  return "?";
}

std::optional<Activation> ActivationFromString(const std::string& name) {
  for (const auto& n : kNames) if (name == n.name) return n.value;
  return std::nullopt;
}

std::string ActivationNames() {
  std::string s;
  for (const auto& n : kNames) {
    if (!s.empty()) s += ", ";
    s += n.name;
  }
  return s;
}

void Apply(Activation a, const Eigen::MatrixXd& z, Eigen::MatrixXd& out) {
  const auto za = z.array();
  switch (a) {
    case Activation::kIdentity: out = z; break;
    case Activation::kRelu: out = za.max(0.0).matrix(); break;
    case Activation::kLeakyRelu: out = (za > 0.0).select(za, kLeakySlope * za).matrix(); break;
    case Activation::kTanh: out = za.tanh().matrix(); break;
    case Activation::kSigmoid: out = Sigmoid(za).matrix(); break;
    case Activation::kSoftplus: out = (za.max(0.0) + (-za.abs()).exp().log1p()).matrix(); break;
    case Activation::kGelu:
      out = (0.5 * za * (1.0 + za.unaryExpr([](double v) { return std::erf(v * kInvSqrt2); }))).matrix();
      break;
  }
}

void ApplyWithDerivative(Activation a, const Eigen::MatrixXd& z, Eigen::MatrixXd& out, Eigen::MatrixXd& deriv) {
  const auto za = z.array();
  switch (a) {
    case Activation::kIdentity:
      out = z;
      deriv.setOnes(z.rows(), z.cols());
      break;
    case Activation::kRelu:
      out = za.max(0.0).matrix();
      deriv = (za > 0.0).cast<double>().matrix();
      break;
    case Activation::kLeakyRelu:
      out = (za > 0.0).select(za, kLeakySlope * za).matrix();
      deriv = (za > 0.0).select(Eigen::ArrayXXd::Ones(z.rows(), z.cols()), kLeakySlope).matrix();
      break;
    case Activation::kTanh:
      out = za.tanh().matrix();
      deriv = (1.0 - out.array().square()).matrix();
      break;
    case Activation::kSigmoid:
      out = Sigmoid(za).matrix();
      deriv = (out.array() * (1.0 - out.array())).matrix();
      break;
    case Activation::kSoftplus:
      out = (za.max(0.0) + (-za.abs()).exp().log1p()).matrix();
      deriv = Sigmoid(za).matrix();
      break;
    case Activation::kGelu: {
      const Eigen::ArrayXXd cdf = 0.5 * (1.0 + za.unaryExpr([](double v) { return std::erf(v * kInvSqrt2); }));
      out = (za * cdf).matrix();
      deriv = (cdf + za * kInvSqrt2Pi * (-0.5 * za.square()).exp()).matrix();
      break;
    }
  }
}

}  // namespace plaudit::model
