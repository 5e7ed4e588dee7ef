#pragma once
// The seven activations of the run-directory contract, applied element-wise to a block of
// pre-activations. `ApplyWithDerivative` computes s(z) and s'(z) in one pass because the
// backward pass needs both and the exponentials dominate the cost.
#include <optional>
#include <string>

#include <Eigen/Core>

namespace plaudit::model {

enum class Activation { kIdentity, kRelu, kLeakyRelu, kTanh, kSigmoid, kSoftplus, kGelu };

// leaky_relu: slope for z < 0 (PyTorch's default negative_slope).
inline constexpr double kLeakySlope = 0.01;

const char* ActivationToString(Activation a);
std::optional<Activation> ActivationFromString(const std::string& name);
std::string ActivationNames();  // "identity, relu, ..." for error messages

// out = s(z)
void Apply(Activation a, const Eigen::MatrixXd& z, Eigen::MatrixXd& out);
// out = s(z), deriv = s'(z); gelu is the exact erf form, softplus has beta = 1.
void ApplyWithDerivative(Activation a, const Eigen::MatrixXd& z, Eigen::MatrixXd& out,
                         Eigen::MatrixXd& deriv);
// Single-precision forms, for the float32 gradient pass (model::Precision::kFloat32).
void Apply(Activation a, const Eigen::MatrixXf& z, Eigen::MatrixXf& out);
void ApplyWithDerivative(Activation a, const Eigen::MatrixXf& z, Eigen::MatrixXf& out,
                         Eigen::MatrixXf& deriv);

}  // namespace plaudit::model
