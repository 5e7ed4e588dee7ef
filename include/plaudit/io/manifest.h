#pragma once
// run.json, the manifest of a run directory (../shared/run-format.md, section 2).
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "plaudit/model/activation.h"
#include "plaudit/model/loss.h"

namespace plaudit::io {

enum class Parameterization { kMeanField, kStandard };
enum class WeightLayout { kOutIn, kInOut };

const char* ParameterizationToString(Parameterization p);
const char* WeightLayoutToString(WeightLayout w);

inline constexpr const char* kRunFormat = "plaudit-run/1";

struct LayerSpec {
  std::string weight;                 // array name in every snapshot
  std::optional<std::string> bias;    // absent: no bias in that layer
  model::Activation activation = model::Activation::kIdentity;
  std::optional<double> multiplier;   // overrides the parameterization's factor
  bool trainable = true;              // false: held fixed during training
};

struct Manifest {
  std::string format = kRunFormat;
  Parameterization parameterization = Parameterization::kMeanField;
  model::Loss loss = model::Loss::kSquared;
  WeightLayout weight_layout = WeightLayout::kOutIn;
  std::vector<LayerSpec> layers;
  std::string data = "data.npz";
  std::string notes;
};

// Parse and validate the JSON text; `file` names the manifest in errors (kBadData).
Manifest ParseManifest(const std::string& text, const std::string& file);
// Read from disk: kMissing when absent.
Manifest ReadManifest(const std::filesystem::path& path);
std::string ManifestToJson(const Manifest& manifest);  // pretty-printed, for writers

}  // namespace plaudit::io
