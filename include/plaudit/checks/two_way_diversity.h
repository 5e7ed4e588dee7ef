#pragma once
// Check `two-way-diversity`: do the neurons of each middle layer still differ in what they read
// and in what they feed?
//
// Global convergence of deep mean-field networks needs diversity that survives through the
// depth in both directions: a middle neuron's incoming weights (from the layer below) and its
// outgoing weights (to the layer above) must both vary across the neurons (the bidirectional
// diversity condition of Pham & Nguyen 2020, "A note on the global convergence of multilayer
// neural networks in the mean field regime"). With i.i.d. initialisation the changes of the
// middle weights are common to all neurons, so the vectors drift together towards one direction.
//
// For each middle layer l = 2..L-1 (1-based), two sets of n_l vectors:
//     incoming  v_j = row j of W_l      in R^{n_{l-1}}
//     outgoing  v_j = column j of W_{l+1} in R^{n_{l+1}}
// each measured with the support-spread machinery on the vectors themselves (no data: a
// direction here is a pattern over neurons, not over inputs): the k leading principal directions
// of their uncentred second moment (stats/pca.h; k = dims, clamped to the vectors' length),
// every vector projected onto them and normalised onto S^{k-1} (zero projections dropped and
// counted), theta = covering radius (stats/covering_radius.h) and
//     ratio = theta / median theta_null,  theta_null of n_l i.i.d. uniform directions on S^{k-1}.
// The frame is not cut at the vectors' rank: vectors confined to fewer than k directions leave a
// large empty cap, which is exactly the collapse measured (all rows equal -> 180 degrees).
// Uncentred, because a common shift of every vector is what removes the diversity.
// A direction whose vectors have a single coordinate (outgoing vectors into a 1-wide output) has
// no sphere to cover and is skipped with a reason. Multipliers scale every vector alike and do
// not change directions.
// statistic = the largest ratio at the last network over the measured layers and directions;
// fails when statistic > threshold (same meaning as support-spread: 2 is well above the 1 to 1.5
// of uniform directions). The step-0 network, when given, is measured the same way and reported.
//
// detail: threshold, dims_requested, worst_layer, worst_direction ("incoming"/"outgoing"),
// layers[] with layer, width, and incoming / outgoing objects holding ratio, theta_degrees,
// null_median_degrees, null_replicas, dims, kept, dropped, moment_fraction (share of the trace in
// the k directions), and ratio_init / theta_degrees_init with a first network; or reason.
#include <cstdint>
#include <string>

#include "plaudit/checks/check_result.h"
#include "plaudit/model/network.h"

namespace plaudit::checks {

inline constexpr const char* kTwoWayDiversityName = "two-way-diversity";

struct TwoWayDiversityOptions {
  int dims = 6;            // k, principal directions per set; 2..8, clamped to the vector length
  int probes = 20000;      // random probes of the sphere; >= 1
  int refine = 8;          // best probes refined with NLopt (SLSQP); >= 0
  int null_replicas = 20;  // uniform replicas for the null median; >= 1
  double threshold = 2.0;  // fails when theta / median(theta_null) > threshold; finite, > 0
  std::uint64_t seed = 0;  // drives the probes, the null and the subspace iteration
  bool IsValid(std::string* why) const;  // message names the field, its value and the rule
};

// `first` (may be null) is the network at step 0. Skips for depth < 3 (no middle layer), when a
// middle layer's weights are not finite, and when no direction of any middle layer can be
// measured. Invalid options raise Error(kUsage); a `first` whose shapes do not match raises
// Error(kBadData).
CheckResult RunTwoWayDiversity(const model::Network& last, const model::Network* first,
                               const TwoWayDiversityOptions& options);

}  // namespace plaudit::checks
