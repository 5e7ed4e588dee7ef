// Run-directory layout (../shared/run-format.md, sections 1 and 3): snapshot discovery, the
// RunDir entry point, and turning a snapshot's arrays into a network.
#include <string>

#include <catch2/catch.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/manifest.h"
#include "plaudit/io/npz.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/model/network.h"
#include "support/error_matcher.h"
#include "support/temp_dir.h"

namespace {

using plaudit::ExitCode;
using plaudit::io::ArrayMap;
using plaudit::io::SnapshotStep;
using plaudit::testing::IsError;
using plaudit::testing::TempDir;

constexpr const char* kManifest = R"({
  "format": "plaudit-run/1", "parameterization": "standard", "loss": "squared",
  "layers": [
    {"weight": "fc1.weight", "bias": "fc1.bias", "activation": "relu"},
    {"weight": "head.weight", "activation": "identity"}
  ]
})";

// fc1: 3 -> 2 with bias, head: 2 -> 1, both out_in.
ArrayMap TwoLayerArrays() {
  ArrayMap a;
  a["fc1.weight"] = plaudit::io::MakeArray((Eigen::MatrixXd(2, 3) << 1, 2, 3, 4, 5, 6).finished());
  a["fc1.bias"] = plaudit::io::MakeVector(Eigen::Vector2d(0.5, -0.5));
  a["head.weight"] = plaudit::io::MakeArray((Eigen::MatrixXd(1, 2) << 7, 8).finished());
  return a;
}

}  // namespace

TEST_CASE("snapshot file names give their step or nothing", "[io][run-dir]") {
  CHECK(SnapshotStep("step-0.npz") == std::optional<std::int64_t>(0));
  CHECK(SnapshotStep("step-12000.npz") == std::optional<std::int64_t>(12000));
  CHECK(SnapshotStep("step-007.npz") == std::optional<std::int64_t>(7));
  for (const char* ignored : {"step-7.npz.tmp", "step-.npz", "step-x.npz", "step--1.npz", "step-1e3.npz",
                              "Step-1.npz", "step-1.npy", "notes.txt", "step-1.npz~", ".step-1.npz.swp",
                              "step-99999999999999999999.npz"}) {
    INFO(ignored);
    CHECK_FALSE(SnapshotStep(ignored).has_value());
  }
}

TEST_CASE("snapshots are listed in numeric step order, other files ignored", "[io][run-dir]") {
  TempDir dir("snapshots");
  for (const char* name : {"step-10.npz", "step-0.npz", "step-100.npz", "step-9.npz", "step-7.npz.tmp",
                           "notes.txt", "step-x.npz"}) {
    dir.Write(name, "");
  }
  std::filesystem::create_directory(dir / "step-5.npz");  // a directory is not a snapshot
  const auto refs = plaudit::io::ListSnapshots(dir.path());
  REQUIRE(refs.size() == 4);
  CHECK(refs[0].step == 0);
  CHECK(refs[1].step == 9);
  CHECK(refs[2].step == 10);
  CHECK(refs[3].step == 100);
  CHECK(refs[3].path.filename() == "step-100.npz");
  CHECK(plaudit::io::ListSnapshots(dir / "absent").empty());
}

TEST_CASE("two files claiming one step are an error naming both", "[io][run-dir]") {
  TempDir dir("snapshots");
  dir.Write("step-7.npz", "");
  dir.Write("step-07.npz", "");
  REQUIRE_THROWS_MATCHES(plaudit::io::ListSnapshots(dir.path()), plaudit::Error,
                         IsError(ExitCode::kBadData, {"step-7.npz", "step-07.npz", "step 7"}));
}

TEST_CASE("RunDir reads the manifest, snapshots and scalars of a directory", "[io][run-dir]") {
  TempDir dir("run");
  SECTION("absent directory or manifest is kMissing") {
    REQUIRE_THROWS_MATCHES(plaudit::io::RunDir(dir / "nowhere"), plaudit::Error,
                           IsError(ExitCode::kMissing, {(dir / "nowhere").string()}));
    REQUIRE_THROWS_MATCHES(plaudit::io::RunDir(dir.path()), plaudit::Error,
                           IsError(ExitCode::kMissing, {(dir / "run.json").string()}));
  }
  SECTION("a complete directory") {
    dir.Write("run.json", kManifest);
    dir.Write("scalars.jsonl", "{\"step\": 0, \"loss\": 1.0}\n{\"step\": 4, \"loss\": 0.5}\n");
    std::filesystem::create_directory(dir / "snapshots");
    plaudit::io::WriteNpz(dir / "snapshots" / "step-4.npz", TwoLayerArrays());
    plaudit::io::WriteNpz(dir / "snapshots" / "step-0.npz", TwoLayerArrays());
    const plaudit::io::RunDir run(dir.path());
    CHECK(run.manifest().layers.size() == 2);
    CHECK_FALSE(run.has_data());
    CHECK(run.data_path() == dir / "data.npz");
    const auto snaps = run.Snapshots();
    REQUIRE(snaps.size() == 2);
    CHECK(snaps[1].step == 4);
    const ArrayMap arrays = run.ReadSnapshot(snaps[1]);
    CHECK(arrays.count("fc1.bias") == 1);
    CHECK(run.Scalars().records.size() == 2);
  }
}

TEST_CASE("NetworkFromArrays builds the manifest's layers from a snapshot", "[network][run-dir]") {
  const auto manifest = plaudit::io::ParseManifest(kManifest, "run.json");
  const auto net = plaudit::model::NetworkFromArrays(manifest, TwoLayerArrays(), "step-0.npz");
  REQUIRE(net.depth() == 2);
  CHECK(net.input_dim() == 3);
  CHECK(net.output_dim() == 1);
  CHECK(net.layers[0].weight(1, 2) == 6.0);
  CHECK(net.layers[0].has_bias);
  CHECK(net.layers[0].bias(1) == -0.5);
  CHECK_FALSE(net.layers[1].has_bias);
  CHECK(net.layers[1].bias.isZero());
  CHECK(net.layers[1].activation == plaudit::model::Activation::kIdentity);
  CHECK(net.parameter_count() == 6 + 2 + 2);

  // The snapshot arrays come back out under the same names and shapes.
  const auto back = plaudit::model::NetworkToArrays(manifest, net);
  for (const auto& [name, array] : TwoLayerArrays()) {
    INFO(name);
    CHECK(back.at(name).shape == array.shape);
    CHECK(back.at(name).values == array.values);
  }
}

TEST_CASE("in_out layout arrays are transposed into out x in weights", "[network][run-dir]") {
  auto manifest = plaudit::io::ParseManifest(kManifest, "run.json");
  manifest.weight_layout = plaudit::io::WeightLayout::kInOut;
  ArrayMap a = TwoLayerArrays();
  a["fc1.weight"] = plaudit::io::MakeArray((Eigen::MatrixXd(3, 2) << 1, 4, 2, 5, 3, 6).finished());
  a["head.weight"] = plaudit::io::MakeArray((Eigen::MatrixXd(2, 1) << 7, 8).finished());
  const auto net = plaudit::model::NetworkFromArrays(manifest, a, "step-0.npz");
  const auto reference = plaudit::model::NetworkFromArrays(plaudit::io::ParseManifest(kManifest, "run.json"),
                                                           TwoLayerArrays(), "step-0.npz");
  CHECK(net.layers[0].weight == reference.layers[0].weight);
  CHECK(net.layers[1].weight == reference.layers[1].weight);
  const auto back = plaudit::model::NetworkToArrays(manifest, net);
  CHECK(back.at("fc1.weight").shape == std::vector<std::int64_t>{3, 2});
  CHECK(back.at("fc1.weight").values == a.at("fc1.weight").values);
}

TEST_CASE("snapshot arrays that do not fit the manifest fail naming the arrays", "[network][run-dir]") {
  const auto manifest = plaudit::io::ParseManifest(kManifest, "run.json");
  const std::string file = "runs/alpha/snapshots/step-3.npz";
  SECTION("consecutive layers disagree") {
    ArrayMap a = TwoLayerArrays();
    a["head.weight"] = plaudit::io::MakeArray(Eigen::MatrixXd::Ones(1, 3));
    REQUIRE_THROWS_MATCHES(plaudit::model::NetworkFromArrays(manifest, a, file), plaudit::Error,
                           IsError(ExitCode::kBadData, {file, "head.weight", "fc1.weight"}));
  }
  SECTION("a weight is missing") {
    ArrayMap a = TwoLayerArrays();
    a.erase("head.weight");
    REQUIRE_THROWS_MATCHES(plaudit::model::NetworkFromArrays(manifest, a, file), plaudit::Error,
                           IsError(ExitCode::kBadData, {file, "head.weight", "missing"}));
  }
  SECTION("a bias is missing") {
    ArrayMap a = TwoLayerArrays();
    a.erase("fc1.bias");
    REQUIRE_THROWS_MATCHES(plaudit::model::NetworkFromArrays(manifest, a, file), plaudit::Error,
                           IsError(ExitCode::kBadData, {file, "fc1.bias"}));
  }
  SECTION("a bias of the wrong length") {
    ArrayMap a = TwoLayerArrays();
    a["fc1.bias"] = plaudit::io::MakeVector(Eigen::Vector3d(1, 2, 3));
    REQUIRE_THROWS_MATCHES(plaudit::model::NetworkFromArrays(manifest, a, file), plaudit::Error,
                           IsError(ExitCode::kBadData, {file, "fc1.bias", "(3,)"}));
  }
  SECTION("a weight that is not 2-D") {
    ArrayMap a = TwoLayerArrays();
    a["fc1.weight"] = plaudit::io::MakeVector(Eigen::VectorXd::Ones(6));
    REQUIRE_THROWS_MATCHES(plaudit::model::NetworkFromArrays(manifest, a, file), plaudit::Error,
                           IsError(ExitCode::kBadData, {file, "fc1.weight", "2-D"}));
  }
}
