#pragma once
// NumPy's NPY format, versions 1.0, 2.0 and 3.0 (numpy/lib/format.py, "NPY format" NEP 1).
// Supported dtypes: <f4 <f8 <i4 <i8 |u1 |b1, either byte order, C or Fortran order.
#include <cstdint>
#include <filesystem>
#include <string>
#include <string_view>

#include "plaudit/io/ndarray.h"

namespace plaudit::io {

// Parsed NPY header: what the payload must hold. Validated before any allocation.
struct NpyHeader {
  DType dtype = DType::kF8;
  bool big_endian = false;
  bool fortran_order = false;
  std::vector<std::int64_t> shape;
  std::size_t header_bytes = 0;  // offset of the payload
  std::uint64_t payload_bytes = 0;
};

// Parse the magic, version and header dict. `where` names the file (and member) in errors.
// `available` is the number of bytes the source really holds; a header that declares more
// payload than that, or whose element count overflows, is rejected here.
NpyHeader ParseNpyHeader(std::string_view bytes, std::uint64_t available, const std::string& where);

// Decode a whole NPY image held in memory.
NdArray ParseNpy(std::string_view bytes, const std::string& where);

// Read a .npy file from disk.
NdArray ReadNpyFile(const std::filesystem::path& path);

// Encode as NPY version 1.0, little-endian, C order, dtype <f8 (or <i8 for integer dtypes).
std::string EncodeNpy(const NdArray& array);

}  // namespace plaudit::io
