// libFuzzer target for the scalars.jsonl reader (io::ParseScalars, what ReadScalars runs on the
// file's text from its resume offset).
#include <cstddef>
#include <cstdint>
#include <string>

#include "fuzz_check.h"
#include "plaudit/core/error.h"
#include "plaudit/io/scalars.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  try {
    const auto log = plaudit::io::ParseScalars(text, "scalars.jsonl");
    // A resumed read starts at consumed_bytes, so it must lie inside the text.
    if (log.consumed_bytes > size) plaudit::fuzz::Fail("consumed_bytes is past the end of the text");
  } catch (const plaudit::Error& e) {
    plaudit::fuzz::CheckError(e);
  }
  return 0;
}
