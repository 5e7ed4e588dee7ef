#include "plaudit/train/draws.h"

#include <cmath>
#include <limits>
#include <utility>

namespace plaudit::train {

double UniformOpen01(std::mt19937_64& rng) {
  constexpr double kStep = 1.0 / 9007199254740992.0;  // 2^-53
  return (static_cast<double>(rng() >> 11) + 0.5) * kStep;
}

double StandardNormal(std::mt19937_64& rng) {
  constexpr double kTwoPi = 6.283185307179586476925286766559;
  const double u1 = UniformOpen01(rng);
  const double u2 = UniformOpen01(rng);
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(kTwoPi * u2);
}

std::uint64_t UniformBelow(std::mt19937_64& rng, std::uint64_t n) {
  const std::uint64_t max = std::numeric_limits<std::uint64_t>::max();
  // 2^64 mod n: the top `rem` values of the engine would favour small residues, so redraw them.
  const std::uint64_t rem = (max % n + 1) % n;
  std::uint64_t v = rng();
  while (v > max - rem) v = rng();
  return v % n;
}

Eigen::MatrixXd NormalMatrix(Eigen::Index rows, Eigen::Index cols, std::mt19937_64& rng) {
  Eigen::MatrixXd m(rows, cols);
  for (Eigen::Index i = 0; i < rows; ++i) {
    for (Eigen::Index j = 0; j < cols; ++j) m(i, j) = StandardNormal(rng);
  }
  return m;
}

void Shuffle(std::vector<Eigen::Index>& items, std::mt19937_64& rng) {
  for (std::size_t i = items.size(); i > 1; --i) {
    const std::size_t j = static_cast<std::size_t>(UniformBelow(rng, i));
    std::swap(items[i - 1], items[j]);
  }
}

}  // namespace plaudit::train
