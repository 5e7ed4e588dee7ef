#pragma once
// Options shared by `audit` and `check`: audit data, seed, threads, and one flag per threshold.
// Threshold flags override a --thresholds file, which overrides the defaults.
#include <map>
#include <memory>
#include <string>

#include <CLI/CLI.hpp>

#include "plaudit/audit/audit.h"

namespace plaudit::cli {

struct AuditArgs {
  std::string run;
  std::string format = "text";
  std::string thresholds_file;
  audit::AuditOptions options;
  std::map<std::string, double> threshold_flags;  // "check.field" -> value, only flags given
  std::string curvature_when = "plateau";  // audit::CurvatureWhenFromString
  std::string curvature_method = "exact";  // exact | central-difference
  bool judged_layer_only = false;
  std::string precision = "double";        // double | float32

  // The options to run with: defaults, then the file, then the flags.
  audit::AuditOptions Resolve() const;
};

// Every audit option: the run, --format, seed, threads, sizes and the thresholds.
void AddAuditArgs(CLI::App& app, AuditArgs& args);
// Only --thresholds FILE and the threshold flags (for `train --watch`).
void AddAuditThresholdArgs(CLI::App& app, AuditArgs& args);

}  // namespace plaudit::cli
