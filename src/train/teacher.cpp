#include "plaudit/train/teacher.h"

#include <cmath>

#include <Eigen/QR>

#include "plaudit/core/error.h"
#include "plaudit/model/evaluate.h"
#include "plaudit/train/draws.h"

namespace plaudit::train {
namespace {

Eigen::MatrixXd UnitRows(Eigen::Index k, Eigen::Index d, std::mt19937_64& rng) {
  Eigen::MatrixXd w = NormalMatrix(k, d, rng);
  w.rowwise().normalize();  // a normalised Gaussian vector is uniform on the sphere
  return w;
}

model::Network TwoLayer(Eigen::MatrixXd rows, model::Activation act, Eigen::VectorXd out_weights) {
  model::Network net;
  net.loss = model::Loss::kSquared;
  model::DenseLayer hidden;
  hidden.bias.setZero(rows.rows());
  hidden.weight = std::move(rows);
  hidden.activation = act;
  model::DenseLayer head;
  head.weight = out_weights.transpose();
  head.bias.setZero(1);
  net.layers = {hidden, head};
  return net;
}

}  // namespace

const char* TeacherKindToString(TeacherKind k) {
  switch (k) {
    case TeacherKind::kReluSum: return "relu-sum";
    case TeacherKind::kTwoLayer: return "two-layer";
    case TeacherKind::kSmooth: return "smooth";
  }
  return "?";
}

std::optional<TeacherKind> TeacherKindFromString(const std::string& name) {
  if (name == "relu-sum") return TeacherKind::kReluSum;
  if (name == "two-layer") return TeacherKind::kTwoLayer;
  if (name == "smooth") return TeacherKind::kSmooth;
  return std::nullopt;
}

const char* InputLawToString(InputLaw law) { return law == InputLaw::kGaussian ? "gaussian" : "cube"; }

std::optional<InputLaw> InputLawFromString(const std::string& name) {
  if (name == "gaussian") return InputLaw::kGaussian;
  if (name == "cube") return InputLaw::kCube;
  return std::nullopt;
}

void ValidateTeacherOptions(const TeacherOptions& o) {
  if (o.dim < 1) raise(ExitCode::kUsage, "teacher input dimension must be >= 1, got {}", o.dim);
  if (o.width < 1) raise(ExitCode::kUsage, "teacher width must be >= 1, got {}", o.width);
  if (o.rows < 1) raise(ExitCode::kUsage, "rows must be >= 1, got {}", o.rows);
  if (!(o.noise >= 0.0) || !std::isfinite(o.noise)) raise(ExitCode::kUsage, "noise must be >= 0, got {}", o.noise);
  const bool orthonormal = o.kind == TeacherKind::kReluSum ||
                           (o.kind == TeacherKind::kTwoLayer && o.row_law == RowLaw::kOrthonormal);
  if (orthonormal && o.width > o.dim) {
    raise(ExitCode::kUsage, "orthonormal teacher rows need width <= dim, got width {} and dim {}", o.width, o.dim);
  }
}

Eigen::MatrixXd OrthonormalRows(Eigen::Index k, Eigen::Index d, std::mt19937_64& rng) {
  const Eigen::MatrixXd g = NormalMatrix(d, k, rng);
  const Eigen::HouseholderQR<Eigen::MatrixXd> qr(g);
  Eigen::MatrixXd q = qr.householderQ() * Eigen::MatrixXd::Identity(d, k);
  const Eigen::MatrixXd r = qr.matrixQR().topRows(k).triangularView<Eigen::Upper>();
  for (Eigen::Index i = 0; i < k; ++i) {
    if (r(i, i) < 0.0) q.col(i) *= -1.0;
  }
  return q.transpose();
}

model::Network MakeTeacher(const TeacherOptions& o, std::mt19937_64& rng) {
  ValidateTeacherOptions(o);
  const Eigen::VectorXd ones = Eigen::VectorXd::Ones(o.width);
  switch (o.kind) {
    case TeacherKind::kReluSum:
      return TwoLayer(OrthonormalRows(o.width, o.dim, rng), model::Activation::kRelu, ones);
    case TeacherKind::kTwoLayer:
      return TwoLayer(o.row_law == RowLaw::kOrthonormal ? OrthonormalRows(o.width, o.dim, rng)
                                                        : UnitRows(o.width, o.dim, rng),
                      o.activation, ones);
    case TeacherKind::kSmooth: {
      const double inv_sqrt_d = 1.0 / std::sqrt(static_cast<double>(o.dim));
      Eigen::MatrixXd w = inv_sqrt_d * NormalMatrix(o.width, o.dim, rng);
      const Eigen::VectorXd b = NormalMatrix(o.width, 1, rng).col(0);
      const Eigen::VectorXd a = NormalMatrix(o.width, 1, rng).col(0) / std::sqrt(static_cast<double>(o.width));
      model::Network net = TwoLayer(std::move(w), model::Activation::kTanh, a);
      net.layers[0].bias = b;
      net.layers[0].has_bias = true;
      return net;
    }
  }
  return {};
}

Eigen::MatrixXd SampleInputs(InputLaw law, Eigen::Index rows, Eigen::Index dim, std::mt19937_64& rng) {
  if (law == InputLaw::kGaussian) return NormalMatrix(rows, dim, rng);
  Eigen::MatrixXd x(rows, dim);
  for (Eigen::Index i = 0; i < rows; ++i) {
    for (Eigen::Index j = 0; j < dim; ++j) x(i, j) = 2.0 * UniformOpen01(rng) - 1.0;
  }
  return x;
}

TeacherData MakeTeacherData(const TeacherOptions& o) {
  std::mt19937_64 rng(o.seed);
  TeacherData out;
  out.teacher = MakeTeacher(o, rng);
  out.data.x = SampleInputs(o.inputs, o.rows, o.dim, rng);
  out.clean = model::Predict(out.teacher, out.data.x);
  out.data.y = out.clean;
  if (o.noise > 0.0) out.data.y += o.noise * NormalMatrix(o.rows, 1, rng);
  return out;
}

io::ArrayMap TeacherDataArrays(const TeacherData& d) {
  io::ArrayMap arrays;
  arrays["x"] = io::MakeArray(d.data.x);
  arrays["y"] = io::MakeVector(d.data.y.col(0));
  arrays["teacher/fc1.weight"] = io::MakeArray(d.teacher.layers[0].weight);
  if (d.teacher.layers[0].has_bias) arrays["teacher/fc1.bias"] = io::MakeVector(d.teacher.layers[0].bias);
  arrays["teacher/head.weight"] = io::MakeArray(d.teacher.layers[1].weight);
  return arrays;
}

}  // namespace plaudit::train
