#pragma once
// Fold assignments for cross-fitting, seeded permutations, and a small fold-parallel loop.
// A fold list holds the held-out rows of each fold; the training rows of fold f are all other
// rows. Randomness comes from explicit seeds through portable integer arithmetic (no
// implementation-defined standard distributions), so the same seed gives the same folds and
// permutations with any standard library.
#include <cstdint>
#include <functional>
#include <random>
#include <vector>

#include <Eigen/Core>

namespace plaudit::stats {

using RowList = std::vector<Eigen::Index>;
using FoldList = std::vector<RowList>;  // held-out rows of each fold, ascending within a fold

// Folds of consecutive rows, as scikit-learn's KFold(shuffle=False) lays them out: fold f holds
// rows [start_f, start_f + size_f) with size_f = n / k + (f < n % k ? 1 : 0).
// Needs 1 <= k <= n (std::invalid_argument otherwise).
FoldList ContiguousFolds(Eigen::Index n, int k);

// The same fold sizes over a seeded random permutation of the rows; rows ascending per fold.
FoldList RandomFolds(Eigen::Index n, int k, std::uint64_t seed);

// A uniformly random permutation of 0..n-1 (Fisher-Yates with unbiased bounded integers).
RowList RandomPermutation(Eigen::Index n, std::mt19937_64& rng);

// Uniform integer in [0, bound) without modulo bias (bound >= 1).
std::uint64_t UniformBelow(std::uint64_t bound, std::mt19937_64& rng);

// Rows of 0..n-1 not in `held_out` (which must be ascending), ascending.
RowList ComplementRows(const RowList& held_out, Eigen::Index n);

// Throws std::invalid_argument unless `folds` has >= 2 non-empty folds that partition 0..n-1
// with every fold ascending.
void ValidatePartition(const FoldList& folds, Eigen::Index n);

// Calls work(f) for f = 0..count-1 on up to `threads` threads (threads <= 1: in order on the
// calling thread). Every call runs even if one throws; the first exception (lowest f) is then
// rethrown. Each call must touch only its own fold's results.
void ForEachFold(int count, int threads, const std::function<void(int)>& work);

}  // namespace plaudit::stats
