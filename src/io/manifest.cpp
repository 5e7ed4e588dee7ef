#include "plaudit/io/manifest.h"

#include <cmath>
#include <fstream>
#include <set>

#include <nlohmann/json.hpp>

#include "plaudit/core/error.h"

namespace plaudit::io {
namespace {

using nlohmann::json;

[[noreturn]] void Bad(const std::string& file, const std::string& what) {
  raise(ExitCode::kBadData, "{}: {}", file, what);
}

std::string RequireString(const json& obj, const char* key, const std::string& file, const std::string& path) {
  const auto it = obj.find(key);
  if (it == obj.end()) Bad(file, fmt::format("missing required field '{}{}'", path, key));
  if (!it->is_string()) Bad(file, fmt::format("field '{}{}' must be a string", path, key));
  return it->get<std::string>();
}

std::string OptionalString(const json& obj, const char* key, const std::string& fallback,
                           const std::string& file) {
  const auto it = obj.find(key);
  if (it == obj.end() || it->is_null()) return fallback;
  if (!it->is_string()) Bad(file, fmt::format("field '{}' must be a string", key));
  return it->get<std::string>();
}

LayerSpec ParseLayer(const json& j, std::size_t index, const std::string& file) {
  const std::string path = fmt::format("layers[{}].", index);
  if (!j.is_object()) Bad(file, fmt::format("layers[{}] must be an object", index));
  LayerSpec layer;
  layer.weight = RequireString(j, "weight", file, path);
  if (auto it = j.find("bias"); it != j.end() && !it->is_null()) {
    if (!it->is_string()) Bad(file, fmt::format("field '{}bias' must be a string", path));
    layer.bias = it->get<std::string>();
  }
  const std::string act = RequireString(j, "activation", file, path);
  const auto parsed = model::ActivationFromString(act);
  if (!parsed) {
    Bad(file, fmt::format("unknown activation '{}' in {}activation (known: {})", act, path, model::ActivationNames()));
  }
  layer.activation = *parsed;
  if (auto it = j.find("multiplier"); it != j.end() && !it->is_null()) {
    if (!it->is_number()) Bad(file, fmt::format("field '{}multiplier' must be a number", path));
    layer.multiplier = it->get<double>();
    if (!std::isfinite(*layer.multiplier)) Bad(file, fmt::format("field '{}multiplier' must be finite", path));
  }
  if (auto it = j.find("trainable"); it != j.end() && !it->is_null()) {
    if (!it->is_boolean()) Bad(file, fmt::format("field '{}trainable' must be true or false", path));
    layer.trainable = it->get<bool>();
  }
  return layer;
}

}  // namespace

const char* ParameterizationToString(Parameterization p) {
  return p == Parameterization::kMeanField ? "mean-field" : "standard";
}

const char* WeightLayoutToString(WeightLayout w) { return w == WeightLayout::kOutIn ? "out_in" : "in_out"; }

Manifest ParseManifest(const std::string& text, const std::string& file) {
  json j;
  try {
    j = json::parse(text);
  } catch (const json::parse_error& e) {
    Bad(file, fmt::format("not valid JSON (byte {}: {})", e.byte, std::string(e.what()).substr(std::string(e.what()).find(':') + 2)));
  } catch (const json::exception& e) {
    // The parser also throws out_of_range (406) for a number beyond double range, e.g. 2e+308.
    Bad(file, fmt::format("not valid JSON ({})", std::string(e.what()).substr(std::string(e.what()).find(']') + 2)));
  }
  if (!j.is_object()) Bad(file, "the manifest must be a JSON object");
  Manifest m;
  m.format = RequireString(j, "format", file, "");
  if (m.format != kRunFormat) Bad(file, fmt::format("unknown format '{}' (this version reads '{}')", m.format, kRunFormat));
  const std::string param = RequireString(j, "parameterization", file, "");
  if (param == "mean-field") m.parameterization = Parameterization::kMeanField;
  else if (param == "standard") m.parameterization = Parameterization::kStandard;
  else Bad(file, fmt::format("unknown parameterization '{}' (known: mean-field, standard)", param));
  const std::string loss = RequireString(j, "loss", file, "");
  const auto parsed_loss = model::LossFromString(loss);
  if (!parsed_loss) Bad(file, fmt::format("unknown loss '{}' (known: squared, cross-entropy, logistic)", loss));
  m.loss = *parsed_loss;
  const std::string layout = OptionalString(j, "weight_layout", "out_in", file);
  if (layout == "out_in") m.weight_layout = WeightLayout::kOutIn;
  else if (layout == "in_out") m.weight_layout = WeightLayout::kInOut;
  else Bad(file, fmt::format("unknown weight_layout '{}' (known: out_in, in_out)", layout));
  const auto layers = j.find("layers");
  if (layers == j.end()) Bad(file, "missing required field 'layers'");
  if (!layers->is_array() || layers->empty()) Bad(file, "field 'layers' must be a non-empty array");
  std::set<std::string> names;
  for (std::size_t i = 0; i < layers->size(); ++i) {
    m.layers.push_back(ParseLayer((*layers)[i], i, file));
    for (const auto* n : {&m.layers.back().weight, m.layers.back().bias ? &*m.layers.back().bias : nullptr}) {
      if (n != nullptr && !names.insert(*n).second) Bad(file, fmt::format("array name '{}' is used twice in 'layers'", *n));
    }
  }
  m.data = OptionalString(j, "data", "data.npz", file);
  m.notes = OptionalString(j, "notes", "", file);
  return m;
}

Manifest ReadManifest(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) raise(ExitCode::kMissing, "{}: manifest not found", path.string());
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  return ParseManifest(text, path.string());
}

std::string ManifestToJson(const Manifest& m) {
  json j;
  j["format"] = m.format;
  j["parameterization"] = ParameterizationToString(m.parameterization);
  j["loss"] = model::LossToString(m.loss);
  j["weight_layout"] = WeightLayoutToString(m.weight_layout);
  j["layers"] = json::array();
  for (const auto& l : m.layers) {
    json lj;
    lj["weight"] = l.weight;
    if (l.bias) lj["bias"] = *l.bias;
    lj["activation"] = model::ActivationToString(l.activation);
    if (l.multiplier) lj["multiplier"] = *l.multiplier;
    if (!l.trainable) lj["trainable"] = false;
    j["layers"].push_back(lj);
  }
  j["data"] = m.data;
  if (!m.notes.empty()) j["notes"] = m.notes;
  return j.dump(2) + "\n";
}

}  // namespace plaudit::io
