#pragma once
// Invariants every fuzz target checks on what a reader returns. A violation aborts, which
// libFuzzer records as a crash with the input that caused it.
#include <cstdint>
#include <cstdio>
#include <cstdlib>

#include "plaudit/core/error.h"
#include "plaudit/io/ndarray.h"

namespace plaudit::fuzz {

[[noreturn]] inline void Fail(const char* what) {
  std::fprintf(stderr, "plaudit fuzz invariant violated: %s\n", what);
  std::abort();
}

// Bad input is bad data (65); "missing" (66) and "usage" (64) never come from bytes in memory.
inline void CheckError(const plaudit::Error& e) {
  if (e.code() != ExitCode::kBadData) Fail("reader raised an exit code other than 65 for bad bytes");
}

// The values hold exactly the product of the shape, in C order (io/ndarray.h).
inline void CheckArray(const io::NdArray& array) {
  std::uint64_t count = 1;
  for (const auto s : array.shape) {
    if (s < 0) Fail("negative extent in shape");
    if (__builtin_mul_overflow(count, static_cast<std::uint64_t>(s), &count)) Fail("shape product overflows");
  }
  if (count != array.values.size()) Fail("values.size() differs from the product of the shape");
}

}  // namespace plaudit::fuzz
