// libFuzzer target for the NPY reader (io::ParseNpy, what ReadNpyFile runs on a file's bytes).
// plaudit::Error is the expected answer to bad input; anything else is a finding.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "fuzz_check.h"
#include "plaudit/core/error.h"
#include "plaudit/io/npy.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  try {
    const auto array = plaudit::io::ParseNpy(
        std::string_view(reinterpret_cast<const char*>(data), size), "fuzz.npy");
    plaudit::fuzz::CheckArray(array);
  } catch (const plaudit::Error& e) {
    plaudit::fuzz::CheckError(e);
  }
  return 0;
}
