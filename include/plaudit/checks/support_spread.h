#pragma once
// Check `support-spread`: do the first-layer neurons still point in every direction?
//
// Each neuron j of the first layer (z = m_1 W x + b) is read as one vector in the standardised,
// augmented input space: with x' = (x - mu) / sd column-wise (sd of a constant column -> 1),
//     m_1 w_j . x + b_j = (m_1 w_j .* sd) . x' + (b_j + m_1 w_j . mu),
// so v_j = (m_1 w_j .* sd, b_j + m_1 w_j . mu) in R^(d+1), the last coordinate meeting the
// constant input. The v_j are projected onto k principal directions of the augmented data
// [x', 1] (uncentred second moment; as x' is centred that matrix is blockdiag(corr(x), 1), so
// the constant direction is always one of the k, with the top k-1 directions of corr(x)),
// normalised to the unit sphere S^{k-1} (zero projections are dropped and counted), and
//     theta     = covering radius of those directions (largest empty cap, radians)
//     statistic = theta / median theta_null,
// theta_null being the covering radius of n i.i.d. uniform directions on S^{k-1}, n = the
// number of first-layer neurons (dropped neurons count against the spread).
// Fails when statistic > threshold; else passes.
//
// A first layer without a bias computes (m_1 w_j .* sd) . (x ./ sd) and has no constant
// direction to reach, so for it v_j = m_1 w_j .* sd in R^d and the k directions are the leading
// principal directions of the uncentred second moment of x ./ sd, k = min(d, 6) by default
// (detail.frame = "bias-free"; "augmented" otherwise). Reading it in the augmented space would
// confine every neuron to a hyperplane and fail the check by construction.
//
// detail: theta (+ _degrees), null_median, null_replicas, probes, refined, dims, dims_requested,
// moments (of the k directions) and moment_fraction (their share of the trace), neurons, kept,
// dropped, dropped_index, frame, clusters / largest_cluster / effective_directions (single linkage
// within cluster_degrees on the projected unit directions; effective = exp(entropy of the
// cluster sizes)), norm_quantiles of |v_j| (min, q25, median, q75, max), empty_cap_direction (a
// unit vector in the augmented standardised input space, constant coordinate last), points_2d
// (first two coordinates of each kept projected direction), outgoing_norm (column norms of
// layers[1].weight for the same neurons, when depth >= 2; outgoing_multiplier = m_2), and, when a
// first network is given, `init` with the same measures at initialisation (statistic_init,
// points_2d_init at the top level too).
#include <cstdint>
#include <string>

#include "plaudit/checks/check_result.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::checks {

inline constexpr const char* kSupportSpreadName = "support-spread";

struct SupportSpreadOptions {
  int dims = 0;            // k; 0 = min(d+1, 6) (bias-free: min(d, 6)); else 2..8, clamped to
                           // the frame's dimension and to the data's rank
  int probes = 20000;      // random probes of the sphere; >= 1
  int refine = 8;          // best probes refined with NLopt (SLSQP); >= 0
  int null_replicas = 20;  // uniform replicas for the null median; >= 1
  double threshold = 2.0;  // fails when theta / median(theta_null) > threshold; finite, > 0
  double cluster_degrees = 5.0;  // single-linkage merge angle; in (0, 180)
  std::uint64_t seed = 0;  // drives the probes, the null and the row subsample
  int max_rows = 20000;    // data rows used for the standardisation and principal directions;
                           // larger sets are subsampled (seeded); >= 2
  bool IsValid(std::string* why) const;  // message names the field, its value and the rule
};

// `first` (may be null) is the network at step 0, measured in the same data frame.
// Skips when n < 2 neurons, d < 1 inputs, fewer than 2 data rows, every input column constant,
// non-finite first-layer parameters, or every neuron projecting to zero.
// Invalid options raise Error(kUsage); data or `first` whose shapes do not match `last` raise
// Error(kBadData).
CheckResult RunSupportSpread(const model::Network& last, const model::Network* first,
                             const model::Dataset& data, const SupportSpreadOptions& options);

}  // namespace plaudit::checks
