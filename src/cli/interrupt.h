#pragma once
// Ctrl-C handling for the long-running subcommands. The flag is the one piece of process-wide
// state in plaudit: a signal handler can reach nothing else.
#include <atomic>

namespace plaudit::cli {

void InstallInterruptHandler();
bool Interrupted();
std::atomic<bool>* InterruptFlag();

}  // namespace plaudit::cli
