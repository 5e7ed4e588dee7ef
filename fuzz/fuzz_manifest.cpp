// libFuzzer target for the run.json reader (io::ParseManifest, what ReadManifest runs on the
// file's text). A manifest it accepts must also survive ManifestToJson and be read back.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "fuzz_check.h"
#include "plaudit/core/error.h"
#include "plaudit/io/manifest.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  plaudit::io::Manifest manifest;
  try {
    manifest = plaudit::io::ParseManifest(text, "run.json");
  } catch (const plaudit::Error& e) {
    plaudit::fuzz::CheckError(e);
    return 0;
  }
  // Not expected to throw at all: what was accepted once is accepted again.
  const auto again = plaudit::io::ParseManifest(plaudit::io::ManifestToJson(manifest), "run.json");
  if (again.layers.size() != manifest.layers.size()) plaudit::fuzz::Fail("manifest round trip lost layers");
  return 0;
}
