#pragma once
// Random draws whose values depend only on the engine's output sequence. The standard
// distributions (std::normal_distribution, std::uniform_int_distribution, std::shuffle) are
// implementation-defined, so the same seed could give other networks with another library;
// these give the same numbers everywhere std::mt19937_64 does.
#include <cstdint>
#include <random>
#include <vector>

#include <Eigen/Core>

namespace plaudit::train {

// Uniform on the open interval (0, 1): the top 53 bits of one engine output, offset by half a step.
double UniformOpen01(std::mt19937_64& rng);
// Standard normal by the Box-Muller transform (two uniforms per value; the second value is dropped
// so that every call consumes the same number of engine outputs).
double StandardNormal(std::mt19937_64& rng);
// Uniform integer in 0..n-1 (n >= 1) by rejection, without modulo bias.
std::uint64_t UniformBelow(std::mt19937_64& rng, std::uint64_t n);
// rows x cols matrix of i.i.d. N(0, 1) entries, drawn in row-major order.
Eigen::MatrixXd NormalMatrix(Eigen::Index rows, Eigen::Index cols, std::mt19937_64& rng);
// Fisher-Yates shuffle in place.
void Shuffle(std::vector<Eigen::Index>& items, std::mt19937_64& rng);

}  // namespace plaudit::train
