#pragma once
// Audit data: inputs x (N x d) and targets y (N x k, or N x 1 labels), from data.npz.
#include <cstdint>
#include <filesystem>
#include <random>
#include <string>

#include <Eigen/Core>

#include "plaudit/model/loss.h"

namespace plaudit::model {

struct Dataset {
  Eigen::MatrixXd x;  // N x d
  Eigen::MatrixXd y;  // N x k (squared) or N x 1 (labels for cross-entropy / logistic)

  Eigen::Index rows() const { return x.rows(); }
  Eigen::Index dim() const { return x.cols(); }
};

// Read data.npz: arrays `x` and `y`; validates shapes, finiteness and label ranges for the loss
// (`classes` = the network's output width, used for cross-entropy). Errors name the file.
Dataset ReadDataset(const std::filesystem::path& path, Loss loss, Eigen::Index classes);

// Validate an in-memory data set the same way (used by ReadDataset and the trainer).
void ValidateDataset(const Dataset& data, Loss loss, Eigen::Index classes, const std::string& file);

// A subsample of at most `max_rows` rows, chosen without replacement by a seeded engine and
// kept in their original order; the whole set when it is small enough.
Dataset Subsample(const Dataset& data, Eigen::Index max_rows, std::uint64_t seed);

// Loss of the best constant predictor on these targets: the baseline L0 every loss is read
// against (squared: the column means; cross-entropy: the class frequencies; logistic: the rate).
double ConstantBaselineLoss(const Dataset& data, Loss loss, Eigen::Index classes);

}  // namespace plaudit::model
