#include <iostream>
#include <memory>

#include <fmt/core.h>

#include "cli/commands.h"
#include "plaudit/core/error.h"
#include "plaudit/io/csv.h"
#include "plaudit/io/npz.h"
#include "plaudit/train/teacher.h"

namespace plaudit::cli {
namespace {

struct SynthArgs {
  std::string out;
  std::string teacher = "relu-sum";
  std::string activation = "relu";
  std::string rows_law = "orthonormal";
  std::string inputs = "gaussian";
  train::TeacherOptions options;
};

int RunSynth(SynthArgs& a) {
  train::TeacherOptions& o = a.options;
  o.kind = *train::TeacherKindFromString(a.teacher);
  o.activation = *model::ActivationFromString(a.activation);
  o.row_law = a.rows_law == "unit-norm" ? train::RowLaw::kUnitNorm : train::RowLaw::kOrthonormal;
  o.inputs = *train::InputLawFromString(a.inputs);
  train::ValidateTeacherOptions(o);
  const train::TeacherData d = train::MakeTeacherData(o);
  const std::filesystem::path out(a.out);
  if (out.extension() == ".csv") {
    std::vector<std::string> columns;
    for (Eigen::Index j = 0; j < d.data.dim(); ++j) columns.push_back(fmt::format("x{}", j + 1));
    columns.push_back("y");
    Eigen::MatrixXd values(d.data.rows(), d.data.dim() + 1);
    values << d.data.x, d.data.y;
    io::WriteCsv(out, columns, values);
  } else if (out.extension() == ".npz") {
    io::WriteNpz(out, train::TeacherDataArrays(d));
  } else {
    raise(ExitCode::kUsage, "{}: output must end in .npz or .csv", a.out);
  }
  fmt::print("{}: {} rows, d = {}, teacher {} with {} neurons, noise {}\n", a.out, o.rows, o.dim, a.teacher, o.width, o.noise);
  return 0;
}

}  // namespace

Command AddSynthCommand(CLI::App& parent) {
  auto* app = parent.add_subcommand("synth", "Write synthetic data from a planted teacher network (.npz or .csv)");
  auto a = std::make_shared<SynthArgs>();
  auto& o = a->options;
  app->add_option("-o,--out", a->out, "Output file: .npz (x, y and the teacher's weights) or .csv")->required();
  app->add_option("--teacher", a->teacher, "relu-sum (Safran & Shamir 2018), two-layer, or smooth")
      ->check(CLI::IsMember({"relu-sum", "two-layer", "smooth"}))->capture_default_str();
  app->add_option("--dim", o.dim, "Input dimension d")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--width", o.width, "Teacher neurons k")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--rows", o.rows, "Samples N")->check(CLI::PositiveNumber)->capture_default_str();
  app->add_option("--activation", a->activation, "two-layer teacher: activation")
      ->check(CLI::IsMember({"identity", "relu", "leaky_relu", "tanh", "sigmoid", "softplus", "gelu"}))->capture_default_str();
  app->add_option("--rows-law", a->rows_law, "two-layer teacher: orthonormal or unit-norm weight rows")
      ->check(CLI::IsMember({"orthonormal", "unit-norm"}))->capture_default_str();
  app->add_option("--inputs", a->inputs, "Input law: gaussian N(0, I) or cube [-1, 1]^d")
      ->check(CLI::IsMember({"gaussian", "cube"}))->capture_default_str();
  app->add_option("--noise", o.noise, "Label noise std")->check(CLI::NonNegativeNumber)->capture_default_str();
  app->add_option("--seed", o.seed, "Seed of the teacher, inputs and noise")->capture_default_str();
  return {app, [a] { return RunSynth(*a); }};
}

}  // namespace plaudit::cli
