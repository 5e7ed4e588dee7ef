#include "cli/interrupt.h"

#include <csignal>

namespace plaudit::cli {
namespace {

std::atomic<bool> g_interrupted{false};

extern "C" void OnInterrupt(int) { g_interrupted.store(true); }

}  // namespace

void InstallInterruptHandler() {
  std::signal(SIGINT, OnInterrupt);
  std::signal(SIGTERM, OnInterrupt);
}

bool Interrupted() { return g_interrupted.load(); }

std::atomic<bool>* InterruptFlag() { return &g_interrupted; }

}  // namespace plaudit::cli
