#pragma once
// The three losses of the contract, per block of rows. Values are sums over the block's rows
// (the caller divides by N), so blocks add up exactly to the full-batch loss.
#include <optional>
#include <string>

#include <Eigen/Core>

namespace plaudit::model {

enum class Loss { kSquared, kCrossEntropy, kLogistic };

const char* LossToString(Loss loss);
std::optional<Loss> LossFromString(const std::string& name);

// Sum over rows of the per-row loss of `output` (B x k) against `target`.
// Targets: squared (B x k) values; cross-entropy (B x 1) class labels 0..k-1;
// logistic (B x 1) in {0, 1} with k == 1.
double LossSum(Loss loss, const Eigen::MatrixXd& output, const Eigen::MatrixXd& target);

// Per-row losses (B), for held-out comparisons.
Eigen::VectorXd LossPerRow(Loss loss, const Eigen::MatrixXd& output, const Eigen::MatrixXd& target);

// d(per-row loss)/d(output) for every row (B x k), not divided by N.
void LossGradient(Loss loss, const Eigen::MatrixXd& output, const Eigen::MatrixXd& target,
                  Eigen::MatrixXd& grad);

// Number of output units the target implies for a loss: squared -> columns of y;
// cross-entropy -> needs the network's k; logistic -> 1.
}  // namespace plaudit::model
