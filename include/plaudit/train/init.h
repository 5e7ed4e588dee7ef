#pragma once
// Initial weights for the built-in trainer. Four schemes:
//   gaussian   i.i.d. N(0, sigma^2) entries in every layer; standard parameterization
//              sigma = gain / sqrt(fan_in), mean-field sigma = gain (the 1/n of the next layer's
//              multiplier does the averaging, so entries stay O(1));
//   sphere     first-layer rows have directions uniform on the unit sphere and a norm drawn from
//              a radius law (fixed, or log-uniform in [radius_min, radius_max]); later layers gaussian;
//   collapsed  first-layer neurons in `clusters` groups of identical neurons (row of W_1, bias and
//              outgoing column of W_2 all copied), so gradient descent keeps them identical unless
//              `jitter` breaks the tie; the cluster centres and later layers are gaussian.
//   latent     the neuronal-embedding initialisation of latent_init.h: weights are smooth random
//              functions of latent points of the neurons they join, so deep networks keep their
//              neurons diverse in both directions (gain and scale as above).
// Every weight is finally multiplied by `scale` (small-initialisation runs: scale << 1).
// Biases start at zero, or with bias_std > 0 as i.i.d. N(0, bias_std^2) in every layer that has
// one (drawn after the weights, so bias_std = 0 leaves the weights of a seed unchanged). Draws come from an explicit engine (draws.h), so a seed fixes the network.
#include <optional>
#include <random>
#include <string>

#include "plaudit/io/manifest.h"
#include "plaudit/model/network.h"
#include "plaudit/train/latent_init.h"

namespace plaudit::train {

enum class InitScheme { kGaussian, kSphere, kCollapsed, kLatent };
enum class RadiusLaw { kFixed, kLogUniform };

const char* InitSchemeToString(InitScheme s);
std::optional<InitScheme> InitSchemeFromString(const std::string& name);  // gaussian, sphere, collapsed, latent

struct InitOptions {
  InitScheme scheme = InitScheme::kGaussian;
  double gain = 1.0;   // gaussian std factor (see above); must be > 0
  double scale = 1.0;  // multiplies every initial weight, after the scheme; must be > 0
  // sphere: norm of each first-layer row before `scale`.
  RadiusLaw radius_law = RadiusLaw::kFixed;
  double radius = 1.0;       // kFixed; must be > 0
  double radius_min = 0.1;   // kLogUniform: log r uniform on [log radius_min, log radius_max],
  double radius_max = 10.0;  //   requires 0 < radius_min <= radius_max
  // collapsed: neuron j of the first layer belongs to group j mod clusters;
  // requires 1 <= clusters <= first-layer width.
  int clusters = 1;
  // collapsed: std of N(0, jitter^2) noise added to every copied weight (before `scale`);
  // 0 keeps exact copies. Must be >= 0.
  double jitter = 0.0;
  // latent: the embedding's settings; its gain and scale are replaced by the two above.
  LatentInitOptions latent;
  double bias_std = 0.0;  // >= 0; see above
};

// Throws Error(kUsage) naming the offending field when a value is out of its documented range.
void ValidateInitOptions(const InitOptions& options, Eigen::Index first_layer_width);

// Draw the weights of `net` in place: shapes, multipliers and has_bias must already be set.
void InitializeWeights(model::Network& net, io::Parameterization p, const InitOptions& options,
                       std::mt19937_64& rng);

}  // namespace plaudit::train
