#include "plaudit/stats/folds.h"

#include <algorithm>
#include <atomic>
#include <exception>
#include <limits>
#include <numeric>
#include <stdexcept>
#include <string>
#include <thread>

namespace plaudit::stats {
namespace {

// Fold sizes of KFold: the first n % k folds take one extra row.
std::vector<Eigen::Index> FoldSizes(Eigen::Index n, int k) {
  if (k < 1 || n < k) {
    throw std::invalid_argument("folds: need 1 <= k <= n, got k = " + std::to_string(k) +
                                ", n = " + std::to_string(n));
  }
  const Eigen::Index kk = k;
  std::vector<Eigen::Index> sizes(static_cast<std::size_t>(k), n / kk);
  for (Eigen::Index f = 0; f < n % kk; ++f) ++sizes[static_cast<std::size_t>(f)];
  return sizes;
}

FoldList SplitInOrder(const RowList& order, const std::vector<Eigen::Index>& sizes) {
  FoldList folds;
  folds.reserve(sizes.size());
  auto first = order.begin();
  for (Eigen::Index size : sizes) {
    RowList fold(first, first + size);
    std::sort(fold.begin(), fold.end());
    folds.push_back(std::move(fold));
    first += size;
  }
  return folds;
}

}  // namespace

std::uint64_t UniformBelow(std::uint64_t bound, std::mt19937_64& rng) {
  // Rejection from the top of the range: accept draws below the largest multiple of bound.
  const std::uint64_t limit = std::numeric_limits<std::uint64_t>::max() -
                              std::numeric_limits<std::uint64_t>::max() % bound;
  std::uint64_t draw = rng();
  while (draw >= limit) draw = rng();
  return draw % bound;
}

RowList RandomPermutation(Eigen::Index n, std::mt19937_64& rng) {
  RowList p(static_cast<std::size_t>(n));
  std::iota(p.begin(), p.end(), Eigen::Index{0});
  for (Eigen::Index i = n - 1; i > 0; --i) {
    const auto j = static_cast<Eigen::Index>(UniformBelow(static_cast<std::uint64_t>(i + 1), rng));
    std::swap(p[static_cast<std::size_t>(i)], p[static_cast<std::size_t>(j)]);
  }
  return p;
}

FoldList ContiguousFolds(Eigen::Index n, int k) {
  const std::vector<Eigen::Index> sizes = FoldSizes(n, k);
  RowList order(static_cast<std::size_t>(n));
  std::iota(order.begin(), order.end(), Eigen::Index{0});
  return SplitInOrder(order, sizes);
}

FoldList RandomFolds(Eigen::Index n, int k, std::uint64_t seed) {
  const std::vector<Eigen::Index> sizes = FoldSizes(n, k);
  std::mt19937_64 rng(seed);
  return SplitInOrder(RandomPermutation(n, rng), sizes);
}

RowList ComplementRows(const RowList& held_out, Eigen::Index n) {
  RowList rest;
  rest.reserve(static_cast<std::size_t>(std::max<Eigen::Index>(0, n - static_cast<Eigen::Index>(held_out.size()))));
  auto next = held_out.begin();
  for (Eigen::Index i = 0; i < n; ++i) {
    if (next != held_out.end() && *next == i) {
      ++next;
    } else {
      rest.push_back(i);
    }
  }
  return rest;
}

void ValidatePartition(const FoldList& folds, Eigen::Index n) {
  if (folds.size() < 2) throw std::invalid_argument("folds: need at least 2 folds");
  std::vector<char> seen(static_cast<std::size_t>(std::max<Eigen::Index>(n, 0)), 0);
  Eigen::Index count = 0;
  for (std::size_t f = 0; f < folds.size(); ++f) {
    const RowList& fold = folds[f];
    if (fold.empty()) throw std::invalid_argument("folds: fold " + std::to_string(f) + " is empty");
    for (std::size_t i = 0; i < fold.size(); ++i) {
      const Eigen::Index row = fold[i];
      if (row < 0 || row >= n) {
        throw std::invalid_argument("folds: row " + std::to_string(row) + " outside 0.." +
                                    std::to_string(n - 1));
      }
      if (i > 0 && fold[i - 1] >= row) {
        throw std::invalid_argument("folds: fold " + std::to_string(f) + " is not ascending");
      }
      if (seen[static_cast<std::size_t>(row)]++) {
        throw std::invalid_argument("folds: row " + std::to_string(row) + " is in two folds");
      }
      ++count;
    }
  }
  if (count != n) {
    throw std::invalid_argument("folds: " + std::to_string(count) + " of " + std::to_string(n) +
                                " rows assigned");
  }
}

void ForEachFold(int count, int threads, const std::function<void(int)>& work) {
  std::vector<std::exception_ptr> errors(static_cast<std::size_t>(std::max(count, 0)));
  auto run = [&](int f) {
    try {
      work(f);
    } catch (...) {
      errors[static_cast<std::size_t>(f)] = std::current_exception();
    }
  };
  const int workers = std::min(threads, count);
  if (workers <= 1) {
    for (int f = 0; f < count; ++f) run(f);
  } else {
    std::atomic<int> next{0};
    std::vector<std::thread> pool;
    pool.reserve(static_cast<std::size_t>(workers));
    for (int w = 0; w < workers; ++w) {
      pool.emplace_back([&] {
        for (int f = next++; f < count; f = next++) run(f);
      });
    }
    for (std::thread& t : pool) t.join();
  }
  for (const std::exception_ptr& e : errors) {
    if (e) std::rethrow_exception(e);
  }
}

}  // namespace plaudit::stats
