#pragma once
// NumPy's NPZ archive: a zip of NPY members, stored or deflated, with the zip64 extra fields
// numpy.savez writes. Member names lose their ".npy" suffix, as numpy.load presents them.
#include <filesystem>
#include <string>
#include <string_view>
#include <vector>

#include "plaudit/io/ndarray.h"

namespace plaudit::io {

// Read every member. Errors (kMissing for an absent file, kBadData otherwise) name the file
// and, where it applies, the member.
ArrayMap ReadNpz(const std::filesystem::path& path);

// Read every member of an archive held in memory; `where` names it in errors (kBadData).
// The same checks as ReadNpz, without a file: used by the fuzz targets.
ArrayMap ParseNpz(std::string_view bytes, const std::string& where);

// Names of the members without reading their payloads.
std::vector<std::string> ListNpz(const std::filesystem::path& path);

// Write an archive of stored members atomically: to `path` + ".tmp", then rename.
void WriteNpz(const std::filesystem::path& path, const ArrayMap& arrays);

}  // namespace plaudit::io
