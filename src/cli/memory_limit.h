#pragma once
// --max-memory SIZE: a cap on the process's address space (setrlimit RLIMIT_AS), so an audit
// of an unexpectedly large run fails with a one-line error instead of exhausting the machine.
// SIZE is bytes with an optional K, M, G or T suffix (powers of 1024), e.g. 512M, 4G.
#include <cstdint>
#include <optional>
#include <string>

namespace plaudit::cli {

// Bytes, or nullopt when `text` is not a size; "0" is no limit.
std::optional<std::uint64_t> ParseMemorySize(const std::string& text);
// Applies the cap; throws Error(kUsage) when the system refuses it.
void ApplyMemoryLimit(std::uint64_t bytes);

}  // namespace plaudit::cli
