#pragma once
// Synthetic data from a planted teacher network: inputs x ~ N(0, I_d) (or uniform on the cube
// [-1, 1]^d), target y = teacher(x) + sigma * N(0, 1) label noise. With noise 0 the teacher is a
// global minimiser of the squared loss for any student that contains it, so a student plateau
// above zero is spurious by construction.
//
// Teachers (all standard parameterization, no output bias):
//   relu-sum   y = sum_{i=1..k} relu(w_i . x) with orthonormal w_i (needs k <= d): the planted
//              ReLU problem of Safran & Shamir, "Spurious Local Minima are Common in Two-Layer
//              ReLU Neural Networks" (ICML 2018), whose k = n case has spurious local minima;
//   two-layer  y = sum_{i=1..k} s(w_i . x), activation s and rows orthonormal or unit-norm
//              (uniform directions), output weights all 1;
//   smooth     y = sum_i a_i tanh(w_i . x + b_i), w_i ~ N(0, I_d / d), b_i ~ N(0, 1),
//              a_i ~ N(0, 1 / k): a random smooth function of O(1) variance.
#include <cstdint>
#include <optional>
#include <random>
#include <string>

#include "plaudit/io/ndarray.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::train {

enum class TeacherKind { kReluSum, kTwoLayer, kSmooth };
enum class InputLaw { kGaussian, kCube };
enum class RowLaw { kOrthonormal, kUnitNorm };

const char* TeacherKindToString(TeacherKind k);
std::optional<TeacherKind> TeacherKindFromString(const std::string& name);  // relu-sum, two-layer, smooth
const char* InputLawToString(InputLaw law);
std::optional<InputLaw> InputLawFromString(const std::string& name);        // gaussian, cube

struct TeacherOptions {
  TeacherKind kind = TeacherKind::kReluSum;
  Eigen::Index dim = 8;     // input dimension d >= 1
  Eigen::Index width = 8;   // teacher neurons k >= 1 (orthonormal rows need k <= d)
  Eigen::Index rows = 2000; // samples N >= 1
  model::Activation activation = model::Activation::kRelu;  // two-layer only
  RowLaw row_law = RowLaw::kOrthonormal;                     // two-layer only
  InputLaw inputs = InputLaw::kGaussian;
  double noise = 0.0;       // label noise std sigma >= 0
  std::uint64_t seed = 1;   // draws the teacher, then the inputs, then the noise
};

struct TeacherData {
  model::Network teacher;
  model::Dataset data;    // x and noisy y (N x 1)
  Eigen::MatrixXd clean;  // teacher(x), N x 1
};

// Throws Error(kUsage) naming the field when a value is out of range.
void ValidateTeacherOptions(const TeacherOptions& options);

// k x d matrix with orthonormal rows (k <= d): Q of a Gaussian matrix's QR, signs fixed by
// R's diagonal so the frame is Haar-distributed.
Eigen::MatrixXd OrthonormalRows(Eigen::Index k, Eigen::Index d, std::mt19937_64& rng);

model::Network MakeTeacher(const TeacherOptions& options, std::mt19937_64& rng);
Eigen::MatrixXd SampleInputs(InputLaw law, Eigen::Index rows, Eigen::Index dim, std::mt19937_64& rng);
TeacherData MakeTeacherData(const TeacherOptions& options);

// x, y and the teacher's weights as teacher/fc1.weight, teacher/fc1.bias (smooth), teacher/head.weight.
io::ArrayMap TeacherDataArrays(const TeacherData& data);

}  // namespace plaudit::train
