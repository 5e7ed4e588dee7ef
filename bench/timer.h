#pragma once
// Repeated wall-clock timing: every figure of the benchmark is the median of `runs` runs, with
// the fastest and slowest beside it, so noise from other work on the machine stays visible.
#include <functional>

namespace plaudit::bench {

struct Timing {
  double median = 0.0;  // seconds
  double min = 0.0;
  double max = 0.0;
  int runs = 0;
};

// Runs `body` `warmup` times untimed (caches, page faults, lazy allocation), then `runs` >= 1
// times timed with std::chrono::steady_clock.
Timing TimeRuns(int runs, const std::function<void()>& body, int warmup = 0);

// Keeps a computed value alive so the compiler cannot drop the work that produced it.
void Consume(double value);

}  // namespace plaudit::bench
