// run.json parsing (../shared/run-format.md, section 2): fields, defaults and refusals.
#include <string>

#include <catch2/catch.hpp>

#include "plaudit/core/error.h"
#include "plaudit/io/manifest.h"
#include "support/error_matcher.h"
#include "support/temp_dir.h"

namespace {

using plaudit::ExitCode;
using plaudit::io::Manifest;
using plaudit::io::ParseManifest;
using plaudit::testing::IsError;

constexpr const char* kFile = "runs/alpha/run.json";

// The example manifest of the contract, section 2.
constexpr const char* kContractExample = R"({
  "format": "plaudit-run/1",
  "parameterization": "mean-field",
  "loss": "squared",
  "weight_layout": "out_in",
  "layers": [
    {"weight": "fc1.weight", "bias": "fc1.bias", "activation": "tanh"},
    {"weight": "fc2.weight", "bias": "fc2.bias", "activation": "tanh"},
    {"weight": "head.weight", "activation": "identity"}
  ],
  "data": "data.npz",
  "notes": "free text"
})";

std::string Minimal(const std::string& extra_top, const std::string& layer0) {
  return R"({"format": "plaudit-run/1", "parameterization": "standard", "loss": "cross-entropy", )" + extra_top +
         R"("layers": [)" + layer0 + "]}";
}

}  // namespace

TEST_CASE("the contract's example manifest parses field by field", "[io][manifest]") {
  const Manifest m = ParseManifest(kContractExample, kFile);
  CHECK(m.format == "plaudit-run/1");
  CHECK(m.parameterization == plaudit::io::Parameterization::kMeanField);
  CHECK(m.loss == plaudit::model::Loss::kSquared);
  CHECK(m.weight_layout == plaudit::io::WeightLayout::kOutIn);
  REQUIRE(m.layers.size() == 3);
  CHECK(m.layers[0].weight == "fc1.weight");
  CHECK(m.layers[0].bias == std::optional<std::string>("fc1.bias"));
  CHECK(m.layers[1].activation == plaudit::model::Activation::kTanh);
  CHECK_FALSE(m.layers[2].bias.has_value());
  CHECK(m.layers[2].activation == plaudit::model::Activation::kIdentity);
  CHECK_FALSE(m.layers[2].multiplier.has_value());
  CHECK(m.layers[2].trainable);
  CHECK(m.data == "data.npz");
  CHECK(m.notes == "free text");
}

TEST_CASE("optional manifest fields take their documented defaults", "[io][manifest]") {
  const Manifest m = ParseManifest(Minimal("", R"({"weight": "w", "activation": "gelu"})"), kFile);
  CHECK(m.weight_layout == plaudit::io::WeightLayout::kOutIn);  // default out_in
  CHECK(m.data == "data.npz");
  CHECK(m.notes.empty());
  CHECK(m.loss == plaudit::model::Loss::kCrossEntropy);
  CHECK(m.parameterization == plaudit::io::Parameterization::kStandard);
  REQUIRE(m.layers.size() == 1);
  CHECK(m.layers[0].activation == plaudit::model::Activation::kGelu);
  CHECK(m.layers[0].trainable);
}

TEST_CASE("per-layer multiplier, trainable flag, in_out layout and data path are read", "[io][manifest]") {
  const Manifest m = ParseManifest(
      Minimal(R"("weight_layout": "in_out", "data": "audit/held.npz", )",
              R"({"weight": "w1", "activation": "leaky_relu", "multiplier": 0.125, "trainable": false},
                 {"weight": "w2", "bias": "b2", "activation": "softplus"})"),
      kFile);
  CHECK(m.weight_layout == plaudit::io::WeightLayout::kInOut);
  CHECK(m.data == "audit/held.npz");
  REQUIRE(m.layers.size() == 2);
  CHECK(m.layers[0].multiplier == std::optional<double>(0.125));
  CHECK_FALSE(m.layers[0].trainable);
  CHECK(m.layers[0].activation == plaudit::model::Activation::kLeakyRelu);
  CHECK(m.layers[1].activation == plaudit::model::Activation::kSoftplus);
}

TEST_CASE("every activation and loss name of the contract is accepted", "[io][manifest]") {
  for (const char* act : {"identity", "relu", "leaky_relu", "tanh", "sigmoid", "softplus", "gelu"}) {
    INFO(act);
    const Manifest m = ParseManifest(Minimal("", std::string(R"({"weight": "w", "activation": ")") + act + "\"}"), kFile);
    CHECK(plaudit::model::ActivationToString(m.layers[0].activation) == std::string(act));
  }
  for (const char* loss : {"squared", "cross-entropy", "logistic"}) {
    const std::string text = std::string(R"({"format": "plaudit-run/1", "parameterization": "mean-field", "loss": ")") +
                             loss + R"(", "layers": [{"weight": "w", "activation": "relu"}]})";
    CHECK(plaudit::model::LossToString(ParseManifest(text, kFile).loss) == std::string(loss));
  }
}

TEST_CASE("ManifestToJson output parses back to the same manifest", "[io][manifest]") {
  const Manifest m = ParseManifest(
      Minimal(R"("weight_layout": "in_out", "notes": "n", )",
              R"({"weight": "a", "bias": "b", "activation": "sigmoid", "multiplier": 2.5, "trainable": false})"),
      kFile);
  const Manifest back = ParseManifest(plaudit::io::ManifestToJson(m), "roundtrip");
  CHECK(back.weight_layout == m.weight_layout);
  CHECK(back.notes == "n");
  CHECK(back.layers[0].bias == m.layers[0].bias);
  CHECK(back.layers[0].multiplier == m.layers[0].multiplier);
  CHECK(back.layers[0].trainable == false);
}

TEST_CASE("invalid manifests fail with kBadData naming the file", "[io][manifest]") {
  const auto bad = [](const std::string& text, const std::string& fragment) {
    INFO(text);
    REQUIRE_THROWS_MATCHES(ParseManifest(text, kFile), plaudit::Error, IsError(ExitCode::kBadData, {kFile, fragment}));
  };
  const std::string layer = R"({"weight": "w", "activation": "tanh"})";
  bad(R"({"format": "plaudit-run/2", "parameterization": "standard", "loss": "squared", "layers": [)" + layer + "]}",
      "plaudit-run/2");
  bad(Minimal("", R"({"weight": "w", "activation": "swish"})"), "swish");
  bad(R"({"format": "plaudit-run/1", "parameterization": "standard", "loss": "hinge", "layers": [)" + layer + "]}",
      "hinge");
  bad(R"({"format": "plaudit-run/1", "parameterization": "ntk", "loss": "squared", "layers": [)" + layer + "]}", "ntk");
  bad(R"({"format": "plaudit-run/1", "parameterization": "standard", "loss": "squared"})", "layers");
  bad(Minimal("", ""), "layers");  // empty list
  bad("this is not JSON {", "JSON");
  bad("[1, 2, 3]", "object");
  bad(Minimal("", R"({"weight": "w", "bias": "w", "activation": "tanh"})"), "'w'");  // duplicate array name
  bad(Minimal("", R"({"weight": "w", "activation": "tanh"}, {"weight": "w", "activation": "tanh"})"), "'w'");
  bad(Minimal("", R"({"activation": "tanh"})"), "weight");
  bad(Minimal("", R"({"weight": "w"})"), "activation");
  bad(Minimal("", R"({"weight": "w", "activation": "tanh", "multiplier": "big"})"), "multiplier");
  bad(Minimal("", R"({"weight": "w", "activation": "tanh", "trainable": 1})"), "trainable");
  bad(Minimal(R"("weight_layout": "columns", )", layer), "columns");
}

TEST_CASE("ReadManifest: an absent file is kMissing, a present one parses", "[io][manifest]") {
  plaudit::testing::TempDir dir("manifest");
  const auto absent = dir / "run.json";
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadManifest(absent), plaudit::Error,
                         IsError(ExitCode::kMissing, {absent.string()}));
  const auto path = dir.Write("run.json", kContractExample);
  CHECK(plaudit::io::ReadManifest(path).layers.size() == 3);
  const auto broken = dir.Write("broken.json", "{\"format\": ");
  REQUIRE_THROWS_MATCHES(plaudit::io::ReadManifest(broken), plaudit::Error,
                         IsError(ExitCode::kBadData, {broken.string()}));
}
