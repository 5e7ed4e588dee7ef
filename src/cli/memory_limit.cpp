#include "cli/memory_limit.h"

#include <sys/resource.h>

#include <cctype>
#include <cerrno>
#include <cstring>
#include <limits>

#include "plaudit/core/error.h"

namespace plaudit::cli {

std::optional<std::uint64_t> ParseMemorySize(const std::string& text) {
  std::size_t digits = 0;
  while (digits < text.size() && std::isdigit(static_cast<unsigned char>(text[digits]))) ++digits;
  if (digits == 0 || digits > 15) return std::nullopt;
  std::uint64_t value = std::stoull(text.substr(0, digits));
  const std::string suffix = text.substr(digits);
  int shift = 0;
  if (suffix.empty() || suffix == "B") {
    shift = 0;
  } else if (suffix == "K" || suffix == "KB" || suffix == "KiB") {
    shift = 10;
  } else if (suffix == "M" || suffix == "MB" || suffix == "MiB") {
    shift = 20;
  } else if (suffix == "G" || suffix == "GB" || suffix == "GiB") {
    shift = 30;
  } else if (suffix == "T" || suffix == "TB" || suffix == "TiB") {
    shift = 40;
  } else {
    return std::nullopt;
  }
  if (value > (std::numeric_limits<std::uint64_t>::max() >> shift)) return std::nullopt;
  return value << shift;
}

void ApplyMemoryLimit(std::uint64_t bytes) {
  if (bytes == 0) return;
  rlimit limit{};
  limit.rlim_cur = static_cast<rlim_t>(bytes);
  limit.rlim_max = RLIM_INFINITY;
  rlimit old{};
  if (getrlimit(RLIMIT_AS, &old) == 0) limit.rlim_max = old.rlim_max;
  if (limit.rlim_max != RLIM_INFINITY && limit.rlim_cur > limit.rlim_max) limit.rlim_cur = limit.rlim_max;
  if (setrlimit(RLIMIT_AS, &limit) != 0) {
    raise(ExitCode::kUsage, "--max-memory: the system refused a limit of {} bytes ({})", bytes, std::strerror(errno));
  }
}

}  // namespace plaudit::cli
