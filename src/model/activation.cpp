#include "plaudit/model/activation.h"

#include <algorithm>
#include <cmath>
#include <type_traits>

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

namespace {

// One body for both precisions; constants are converted once so float math stays float.
template <typename Scalar>
using Matrix = Eigen::Matrix<Scalar, Eigen::Dynamic, Eigen::Dynamic>;
template <typename Scalar>
using Array = Eigen::Array<Scalar, Eigen::Dynamic, Eigen::Dynamic>;

// tanh for double arrays from Eigen's vectorised exp and log: Eigen 3.4 vectorises tanh for
// float only, and the scalar std::tanh (about 14 ns an element) cost as much as the matrix
// products of a gradient pass. tanh z = e/(e+2) with e = expm1(2z), and expm1 by Kahan's trick
// (u = exp(y), expm1(y) = y (u-1) / log(u); Higham, Accuracy and Stability of Numerical
// Algorithms, 2nd ed., section 1.14.1), which keeps small arguments accurate. Adding 1e-300 to
// both factors makes u == 1 give y exactly and changes nothing else (it is far below their
// ulp), so there is no branch and every step vectorises. 2z is capped at +-40, where tanh
// rounds to +-1; the caps keep NaN (std::min semantics).
// Works through the array in chunks small enough to stay in cache: the four passes over a
// 4 MiB block otherwise cost memory traffic comparable to the arithmetic.
void TanhDouble(const double* z, double* out, Eigen::Index n) {
  constexpr Eigen::Index kChunk = 1024;
  Eigen::Array<double, kChunk, 1> y, u;
  for (Eigen::Index start = 0; start < n; start += kChunk) {
    const Eigen::Index m = std::min(kChunk, n - start);
    const Eigen::Map<const Eigen::ArrayXd> zs(z + start, m);
    Eigen::Map<Eigen::ArrayXd> o(out + start, m);
    auto ys = y.head(m);
    auto us = u.head(m);
    ys = (2.0 * zs).min(40.0).max(-40.0);
    us = ys.exp();
    o = ys * ((us - 1.0 + 1e-300) / (us.log() + 1e-300));
    o = (o / (o + 2.0)).min(1.0).max(-1.0);  // rounding near +-40 can step past +-1
  }
}

template <typename Derived>
Eigen::ArrayXXd TanhDouble(const Eigen::ArrayBase<Derived>& z) {
  const Eigen::ArrayXXd dense = z;  // sigmoid's argument: one evaluated expression
  Eigen::ArrayXXd out(dense.rows(), dense.cols());
  TanhDouble(dense.data(), out.data(), dense.size());
  return out;
}

template <typename Derived>
auto TanhOf(const Eigen::ArrayBase<Derived>& z) {
  if constexpr (std::is_same_v<typename Derived::Scalar, double>) return TanhDouble(z);
  else return z.tanh().eval();
}

// out = tanh(z) for a plain matrix: the double form reads and writes the matrices directly.
template <typename Scalar>
void TanhInto(const Matrix<Scalar>& z, Matrix<Scalar>& out) {
  if constexpr (std::is_same_v<Scalar, double>) {
    out.resize(z.rows(), z.cols());
    TanhDouble(z.data(), out.data(), z.size());
  } else {
    out = z.array().tanh().matrix();
  }
}

// sigmoid through tanh: no overflow for large |z|.
template <typename Derived>
auto SigmoidOf(const Eigen::ArrayBase<Derived>& z) {
  using S = typename Derived::Scalar;
  return (S(0.5) * (TanhOf((S(0.5) * z).eval()) + S(1))).eval();
}

template <typename Scalar>
void ApplyImpl(Activation a, const Matrix<Scalar>& z, Matrix<Scalar>& out) {
  using S = Scalar;
  const auto za = z.array();
  switch (a) {
    case Activation::kIdentity: out = z; break;
    case Activation::kRelu: out = za.max(S(0)).matrix(); break;
    case Activation::kLeakyRelu: out = (za > S(0)).select(za, S(kLeakySlope) * za).matrix(); break;
    case Activation::kTanh: TanhInto(z, out); break;
    case Activation::kSigmoid: out = SigmoidOf(za).matrix(); break;
    case Activation::kSoftplus: out = (za.max(S(0)) + (-za.abs()).exp().log1p()).matrix(); break;
    case Activation::kGelu:
      out = (S(0.5) * za * (S(1) + za.unaryExpr([](S v) { return std::erf(v * S(kInvSqrt2)); }))).matrix();
      break;
  }
}

template <typename Scalar>
void ApplyWithDerivativeImpl(Activation a, const Matrix<Scalar>& z, Matrix<Scalar>& out, Matrix<Scalar>& deriv) {
  using S = Scalar;
  const auto za = z.array();
  switch (a) {
    case Activation::kIdentity:
      out = z;
      deriv.setOnes(z.rows(), z.cols());
      break;
    case Activation::kRelu:
      out = za.max(S(0)).matrix();
      deriv = (za > S(0)).template cast<S>().matrix();
      break;
    case Activation::kLeakyRelu:
      out = (za > S(0)).select(za, S(kLeakySlope) * za).matrix();
      deriv = (za > S(0)).select(Array<S>::Ones(z.rows(), z.cols()), S(kLeakySlope)).matrix();
      break;
    case Activation::kTanh:
      TanhInto(z, out);
      deriv = (S(1) - out.array().square()).matrix();
      break;
    case Activation::kSigmoid:
      out = SigmoidOf(za).matrix();
      deriv = (out.array() * (S(1) - out.array())).matrix();
      break;
    case Activation::kSoftplus:
      out = (za.max(S(0)) + (-za.abs()).exp().log1p()).matrix();
      deriv = SigmoidOf(za).matrix();
      break;
    case Activation::kGelu: {
      const Array<S> cdf = S(0.5) * (S(1) + za.unaryExpr([](S v) { return std::erf(v * S(kInvSqrt2)); }));
      out = (za * cdf).matrix();
      deriv = (cdf + za * S(kInvSqrt2Pi) * (S(-0.5) * za.square()).exp()).matrix();
      break;
    }
  }
}

}  // namespace

void Apply(Activation a, const Eigen::MatrixXd& z, Eigen::MatrixXd& out) { ApplyImpl<double>(a, z, out); }
void Apply(Activation a, const Eigen::MatrixXf& z, Eigen::MatrixXf& out) { ApplyImpl<float>(a, z, out); }

void ApplyWithDerivative(Activation a, const Eigen::MatrixXd& z, Eigen::MatrixXd& out, Eigen::MatrixXd& deriv) {
  ApplyWithDerivativeImpl<double>(a, z, out, deriv);
}
void ApplyWithDerivative(Activation a, const Eigen::MatrixXf& z, Eigen::MatrixXf& out, Eigen::MatrixXf& deriv) {
  ApplyWithDerivativeImpl<float>(a, z, out, deriv);
}

}  // namespace plaudit::model
