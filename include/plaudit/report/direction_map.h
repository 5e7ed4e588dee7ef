#pragma once
// Where the first-layer neurons point, for the report's direction maps: each neuron read as a
// direction in support-spread's frame (plaudit/checks/support_spread.h: the standardised,
// augmented input space, projected on its k principal directions and normalised onto S^{k-1}),
// shown by its coordinates along the top two of those directions. Points inside the unit circle
// lean into the other k - 2 directions.
//
// The check's own detail holds these points for the last network (points_2d) and the first
// (points_2d_init); this map recomputes them from the networks so that it can also give the
// outgoing weight of every neuron at both ends and place the check's largest empty cap and
// residual-fit's best new neuron (directions in the same space) in the same projection. On the
// audit rows, with no more rows than support-spread's max_rows, its points equal points_2d.
#include <array>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "plaudit/audit/audit.h"
#include "plaudit/io/run_dir.h"
#include "plaudit/model/dataset.h"
#include "plaudit/model/network.h"

namespace plaudit::report {

struct DirectionPoints {
  std::vector<double> x, y;           // coordinates along the top two directions, in [-1, 1]
  std::vector<double> weight;         // outgoing weight norm (column of layers[1].weight); empty with one layer
  std::vector<Eigen::Index> neuron;   // the neuron of each point (neurons with no direction are left out)
};

struct DirectionMap {
  std::string frame;                  // "augmented" (first layer with a bias) or "bias-free"
  int dims = 0;                       // k
  std::array<std::string, 2> axis_names;  // e.g. "principal direction 1", "constant (bias) direction"
  std::array<double, 2> moments{};    // the data's second moment along each of the two
  double moment_share = 0.0;          // their share of the trace
  std::int64_t first_step = 0, last_step = 0;
  DirectionPoints first, last;
  std::optional<std::array<double, 2>> empty_cap;    // support-spread's largest empty cap, its centre
  double empty_cap_degrees = 0.0;                    // its angular radius
  std::optional<std::array<double, 2>> best_neuron;  // residual-fit's best new neuron's direction
};

// `report` supplies the checks' details (frame size, empty cap, best neuron) and the steps;
// `data` are the audit rows. A network without a first layer, or inputs that span fewer than two
// directions, raise Error(kBadData).
DirectionMap ComputeDirectionMap(const model::Network& first, const model::Network& last, const model::Dataset& data,
                                 const audit::AuditReport& report);

// Reads the first and last snapshots and the audit rows as the audit did. Empty without data.npz
// or when the inputs span fewer than two directions.
std::optional<DirectionMap> DirectionMapForRun(const io::RunDir& run, const audit::AuditReport& report,
                                               const audit::AuditOptions& options);
// The same from inputs the audit already read.
std::optional<DirectionMap> DirectionMapForInputs(const audit::AuditInputs& inputs, const audit::AuditReport& report);

}  // namespace plaudit::report
