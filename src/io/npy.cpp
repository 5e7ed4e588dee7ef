#include "plaudit/io/npy.h"

#include <algorithm>
#include <cctype>
#include <cstring>
#include <fstream>
#include <limits>

#include "plaudit/core/error.h"

namespace plaudit::io {
namespace {

constexpr char kMagic[] = "\x93NUMPY";
constexpr std::size_t kMagicLen = 6;

std::size_t ItemSize(DType t) {
  switch (t) {
    case DType::kF4: case DType::kI4: return 4;
    case DType::kF8: case DType::kI8: return 8;
    case DType::kU1: case DType::kB1: return 1;
  }
  return 0;
}

// Minimal reader for the Python dict literal NumPy writes as the header.
class HeaderDict {
 public:
  HeaderDict(std::string_view text, const std::string& where) : text_(text), where_(where) {}

  std::string_view ValueOf(const char* key) const {
    const std::string quoted1 = fmt::format("'{}'", key);
    const std::string quoted2 = fmt::format("\"{}\"", key);
    auto pos = text_.find(quoted1);
    std::size_t len = quoted1.size();
    if (pos == std::string_view::npos) {
      pos = text_.find(quoted2);
      len = quoted2.size();
    }
    if (pos == std::string_view::npos) Bad(fmt::format("header has no '{}' entry", key));
    pos = text_.find(':', pos + len);
    if (pos == std::string_view::npos) Bad(fmt::format("header entry '{}' has no value", key));
    ++pos;
    while (pos < text_.size() && std::isspace(static_cast<unsigned char>(text_[pos]))) ++pos;
    // The value ends at the matching ')' for tuples, else at the next ',' or '}'.
    std::size_t end = pos;
    if (pos < text_.size() && text_[pos] == '(') {
      end = text_.find(')', pos);
      if (end == std::string_view::npos) Bad("unterminated shape tuple in header");
      ++end;
    } else {
      while (end < text_.size() && text_[end] != ',' && text_[end] != '}') ++end;
    }
    auto value = text_.substr(pos, end - pos);
    while (!value.empty() && std::isspace(static_cast<unsigned char>(value.back()))) value.remove_suffix(1);
    return value;
  }

  [[noreturn]] void Bad(const std::string& what) const {
    raise(ExitCode::kBadData, "{}: not a valid NPY array: {}", where_, what);
  }

 private:
  std::string_view text_;
  const std::string& where_;
};

void ParseDescr(std::string_view v, NpyHeader& h, const HeaderDict& dict) {
  if (v.size() < 2 || (v.front() != '\'' && v.front() != '"') || v.back() != v.front()) {
    dict.Bad(fmt::format("dtype {} is not a simple dtype string", v));
  }
  std::string d(v.substr(1, v.size() - 2));
  if (d.size() != 3) dict.Bad(fmt::format("dtype '{}' is not supported (supported: <f4 <f8 <i4 <i8 |u1 |b1)", d));
  const char order = d[0];
  const std::string kind = d.substr(1);
  if (kind == "f4") h.dtype = DType::kF4;
  else if (kind == "f8") h.dtype = DType::kF8;
  else if (kind == "i4") h.dtype = DType::kI4;
  else if (kind == "i8") h.dtype = DType::kI8;
  else if (kind == "u1") h.dtype = DType::kU1;
  else if (kind == "b1") h.dtype = DType::kB1;
  else dict.Bad(fmt::format("dtype '{}' is not supported (supported: <f4 <f8 <i4 <i8 |u1 |b1)", d));
  if (order == '>') h.big_endian = true;
  else if (order == '<' || order == '|' || order == '=') h.big_endian = false;
  else dict.Bad(fmt::format("dtype '{}' has an unknown byte-order mark", d));
}

void ParseShape(std::string_view v, NpyHeader& h, const HeaderDict& dict) {
  if (v.size() < 2 || v.front() != '(' || v.back() != ')') dict.Bad(fmt::format("shape {} is not a tuple", v));
  std::string_view inner = v.substr(1, v.size() - 2);
  std::size_t pos = 0;
  while (pos < inner.size()) {
    while (pos < inner.size() && (std::isspace(static_cast<unsigned char>(inner[pos])) || inner[pos] == ',')) ++pos;
    if (pos >= inner.size()) break;
    std::int64_t value = 0;
    std::size_t start = pos;
    while (pos < inner.size() && std::isdigit(static_cast<unsigned char>(inner[pos]))) {
      const int digit = inner[pos] - '0';
      if (value > (std::numeric_limits<std::int64_t>::max() - digit) / 10) dict.Bad("shape entry overflows");
      value = value * 10 + digit;
      ++pos;
    }
    if (pos == start) dict.Bad(fmt::format("shape {} has a non-integer entry", v));
    if (pos < inner.size() && inner[pos] == 'L') ++pos;  // Python 2 long suffix
    h.shape.push_back(value);
  }
}

template <typename T>
T LoadScalar(const char* p, bool swap) {
  unsigned char buf[sizeof(T)];
  std::memcpy(buf, p, sizeof(T));
  if (swap) std::reverse(buf, buf + sizeof(T));
  T value;
  std::memcpy(&value, buf, sizeof(T));
  return value;
}

void Decode(const char* p, const NpyHeader& h, std::vector<double>& out) {
  const std::size_t n = out.size();
  const bool swap = h.big_endian;
  switch (h.dtype) {
    case DType::kF4: for (std::size_t i = 0; i < n; ++i) out[i] = LoadScalar<float>(p + 4 * i, swap); break;
    case DType::kF8: for (std::size_t i = 0; i < n; ++i) out[i] = LoadScalar<double>(p + 8 * i, swap); break;
    case DType::kI4: for (std::size_t i = 0; i < n; ++i) out[i] = LoadScalar<std::int32_t>(p + 4 * i, swap); break;
    case DType::kI8: for (std::size_t i = 0; i < n; ++i) out[i] = static_cast<double>(LoadScalar<std::int64_t>(p + 8 * i, swap)); break;
    case DType::kU1: for (std::size_t i = 0; i < n; ++i) out[i] = static_cast<unsigned char>(p[i]); break;
    case DType::kB1: for (std::size_t i = 0; i < n; ++i) out[i] = p[i] != 0 ? 1.0 : 0.0; break;
  }
}

// Fortran order stores the reversed-axis C array; transpose back to C order.
std::vector<double> FortranToC(const std::vector<double>& f, const std::vector<std::int64_t>& shape) {
  const std::size_t nd = shape.size();
  std::vector<double> c(f.size());
  std::vector<std::int64_t> index(nd, 0);
  std::vector<std::int64_t> fstride(nd, 1);
  for (std::size_t k = 1; k < nd; ++k) fstride[k] = fstride[k - 1] * shape[k - 1];
  for (std::size_t ci = 0; ci < c.size(); ++ci) {
    std::int64_t fi = 0;
    for (std::size_t k = 0; k < nd; ++k) fi += index[k] * fstride[k];
    c[ci] = f[static_cast<std::size_t>(fi)];
    for (std::size_t k = nd; k-- > 0;) {  // increment the C-order multi-index
      if (++index[k] < shape[k]) break;
      index[k] = 0;
    }
  }
  return c;
}

}  // namespace

NpyHeader ParseNpyHeader(std::string_view bytes, std::uint64_t available, const std::string& where) {
  auto bad = [&](const std::string& what) -> void {
    raise(ExitCode::kBadData, "{}: not a valid NPY array: {}", where, what);
  };
  if (bytes.size() < kMagicLen + 4 || std::memcmp(bytes.data(), kMagic, kMagicLen) != 0) {
    bad(bytes.size() < kMagicLen + 4 ? "file is truncated before the header" : "missing the NPY magic string");
  }
  const int major = static_cast<unsigned char>(bytes[6]);
  std::size_t header_len = 0;
  std::size_t prefix = 0;
  if (major == 1) {
    header_len = static_cast<unsigned char>(bytes[8]) | (static_cast<std::size_t>(static_cast<unsigned char>(bytes[9])) << 8);
    prefix = 10;
  } else if (major == 2 || major == 3) {
    if (bytes.size() < 12) bad("file is truncated before the header");
    header_len = 0;
    for (int i = 0; i < 4; ++i) header_len |= static_cast<std::size_t>(static_cast<unsigned char>(bytes[8 + i])) << (8 * i);
    prefix = 12;
  } else {
    bad(fmt::format("format version {}.{} is not supported (1.0, 2.0, 3.0 are)", major, static_cast<unsigned char>(bytes[7])));
  }
  if (prefix + header_len > bytes.size()) bad("file is truncated inside the header");
  NpyHeader h;
  h.header_bytes = prefix + header_len;
  const std::string_view text = bytes.substr(prefix, header_len);
  HeaderDict dict(text, where);
  ParseDescr(dict.ValueOf("descr"), h, dict);
  const auto fo = dict.ValueOf("fortran_order");
  if (fo == "True") h.fortran_order = true;
  else if (fo == "False") h.fortran_order = false;
  else dict.Bad(fmt::format("fortran_order is '{}', expected True or False", fo));
  ParseShape(dict.ValueOf("shape"), h, dict);

  // Bound memory by what the source really holds before anything is allocated.
  std::uint64_t count = 1;
  for (auto s : h.shape) {
    const auto u = static_cast<std::uint64_t>(s);
    if (u != 0 && count > std::numeric_limits<std::uint64_t>::max() / 16 / u) {
      bad(fmt::format("shape ({}) has an element count that overflows", fmt::join(h.shape, ", ")));
    }
    count *= u;
  }
  h.payload_bytes = count * ItemSize(h.dtype);
  const std::uint64_t room = available >= h.header_bytes ? available - h.header_bytes : 0;
  if (h.payload_bytes > room) {
    bad(fmt::format("header declares {} elements ({} bytes) but only {} bytes of data follow (truncated?)",
                    count, h.payload_bytes, room));
  }
  return h;
}

NdArray ParseNpy(std::string_view bytes, const std::string& where) {
  const NpyHeader h = ParseNpyHeader(bytes, bytes.size(), where);
  NdArray a;
  a.dtype = h.dtype;
  a.shape = h.shape;
  a.values.resize(static_cast<std::size_t>(h.payload_bytes / ItemSize(h.dtype)));
  Decode(bytes.data() + h.header_bytes, h, a.values);
  if (h.fortran_order && a.shape.size() > 1) a.values = FortranToC(a.values, a.shape);
  return a;
}

NdArray ReadNpyFile(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) raise(ExitCode::kMissing, "{}: cannot open file", path.string());
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  return ParseNpy(bytes, path.string());
}

std::string EncodeNpy(const NdArray& array) {
  const bool integer = IsInteger(array.dtype);
  std::string shape;
  if (array.shape.size() == 1) shape = fmt::format("({},)", array.shape[0]);
  else shape = fmt::format("({})", fmt::join(array.shape, ", "));
  std::string header = fmt::format("{{'descr': '{}', 'fortran_order': False, 'shape': {}, }}",
                                   integer ? "<i8" : "<f8", shape);
  // Pad so that the payload starts on a 64-byte boundary, as NumPy does.
  const std::size_t total = kMagicLen + 4 + header.size() + 1;
  header.append((64 - total % 64) % 64, ' ');
  header.push_back('\n');
  std::string out(kMagic, kMagicLen);
  out.push_back('\x01');
  out.push_back('\x00');
  out.push_back(static_cast<char>(header.size() & 0xff));
  out.push_back(static_cast<char>((header.size() >> 8) & 0xff));
  out += header;
  const std::size_t base = out.size();
  out.resize(base + 8 * array.values.size());
  for (std::size_t i = 0; i < array.values.size(); ++i) {
    if (integer) {
      const auto v = static_cast<std::int64_t>(array.values[i]);
      std::memcpy(&out[base + 8 * i], &v, 8);
    } else {
      std::memcpy(&out[base + 8 * i], &array.values[i], 8);
    }
  }
  return out;
}

}  // namespace plaudit::io
