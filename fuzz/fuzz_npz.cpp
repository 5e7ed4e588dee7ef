// libFuzzer target for the NPZ reader, through the in-memory entry point io::ParseNpz (the
// same member checks as ReadNpz; libzip reads the bytes through zip_source_buffer_create).
#include <cstddef>
#include <cstdint>
#include <string_view>

#include "fuzz_check.h"
#include "plaudit/core/error.h"
#include "plaudit/io/npz.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  try {
    const auto arrays = plaudit::io::ParseNpz(
        std::string_view(reinterpret_cast<const char*>(data), size), "fuzz.npz");
    for (const auto& [name, array] : arrays) plaudit::fuzz::CheckArray(array);
  } catch (const plaudit::Error& e) {
    plaudit::fuzz::CheckError(e);
  }
  return 0;
}
