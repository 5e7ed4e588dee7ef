// A run with 10 000 snapshots streams: the audit holds one snapshot's network at a time (plus
// the first and the last), so its memory does not grow with the number of snapshots. Checked by
// running `plaudit audit` under an address-space cap that holding every snapshot would break.
#include <filesystem>
#include <fstream>
#include <random>

#include <catch2/catch.hpp>
#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "plaudit/io/npz.h"
#include "plaudit/model/network.h"
#include "plaudit/train/trainer.h"
#include "support/cli_process.h"
#include "support/temp_dir.h"

namespace fs = std::filesystem;
using plaudit::testing::RunPlaudit;
using plaudit::testing::TempDir;

TEST_CASE("an audit of 10 000 snapshots keeps one in memory at a time", "[limits][streaming]") {
  // 8 -> 96 -> 96 -> 1: 10 176 parameters, 81 kB of float64 per snapshot, so 10 000 snapshots
  // held at once would take 814 MB, far beyond the 400 MiB cap below (the process itself, its
  // libraries and the audit of 64 rows need well under 200 MiB).
  plaudit::train::TrainOptions o;
  o.widths = {96, 96};
  o.lr = 0.1;
  TempDir dir("streaming");
  const fs::path run = dir.path();
  fs::create_directories(run / "snapshots");
  const plaudit::io::Manifest manifest = plaudit::train::TrainManifest(o);
  { std::ofstream(run / "run.json") << plaudit::io::ManifestToJson(manifest); }
  std::mt19937_64 rng(3);
  std::normal_distribution<double> n01;
  Eigen::MatrixXd x(64, 8), y(64, 1);
  for (Eigen::Index i = 0; i < x.size(); ++i) x(i) = n01(rng);
  for (Eigen::Index i = 0; i < y.size(); ++i) y(i) = n01(rng);
  plaudit::io::WriteNpz(run / "data.npz", {{"x", plaudit::io::MakeArray(x)}, {"y", plaudit::io::MakeArray(y)}});
  plaudit::model::Network net = plaudit::train::InitialNetwork(o, 8, 1, rng);
  const int snapshots = 10000;
  for (int s = 0; s < snapshots; ++s) {
    // A slow drift of the weights, so every snapshot differs and no layer looks frozen.
    for (auto& layer : net.layers) layer.weight *= 0.9999;
    plaudit::io::WriteNpz(run / "snapshots" / fmt::format("step-{}.npz", s), plaudit::model::NetworkToArrays(manifest, net));
  }

  std::vector<std::string> args = {"audit", run.string(), "--format", "json", "--curvature", "never"};
#if !defined(__SANITIZE_ADDRESS__)
  // AddressSanitizer reserves terabytes of address space: no cap under it.
  args.insert(args.begin(), {"--max-memory", "400M"});
#endif
  const auto r = RunPlaudit(args);
  INFO(r.command << "\nexit " << r.exit_code << "\n" << r.err);
  REQUIRE(r.exit_code >= 0);
  REQUIRE(r.exit_code <= 3);  // a verdict, not an error
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["trajectory"]["points"].size() == static_cast<std::size_t>(snapshots));
  CHECK(j["step"].get<int>() == snapshots - 1);
}
