#include "timer.h"

#include <algorithm>
#include <chrono>
#include <stdexcept>
#include <vector>

namespace plaudit::bench {

Timing TimeRuns(int runs, const std::function<void()>& body, int warmup) {
  if (runs < 1) throw std::invalid_argument("timing needs at least one run");
  for (int i = 0; i < warmup; ++i) body();
  std::vector<double> seconds;
  seconds.reserve(static_cast<std::size_t>(runs));
  for (int i = 0; i < runs; ++i) {
    const auto start = std::chrono::steady_clock::now();
    body();
    seconds.push_back(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }
  std::sort(seconds.begin(), seconds.end());
  const std::size_t mid = seconds.size() / 2;
  Timing t;
  t.runs = runs;
  t.min = seconds.front();
  t.max = seconds.back();
  t.median = seconds.size() % 2 == 1 ? seconds[mid] : 0.5 * (seconds[mid - 1] + seconds[mid]);
  return t;
}

namespace {
volatile double sink = 0.0;
}  // namespace

void Consume(double value) { sink = sink + value; }

}  // namespace plaudit::bench
