#include "plaudit/core/threads.h"

#include <algorithm>
#include <thread>

namespace plaudit {

int ThreadsFor(int requested) {
  return requested > 0 ? requested : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
}

}  // namespace plaudit
