#include "plaudit/io/npz.h"

#include <zip.h>

#include <algorithm>
#include <memory>
#include <system_error>

#include "plaudit/core/error.h"
#include "plaudit/io/npy.h"

namespace plaudit::io {
namespace {

// Deflate cannot expand data by more than about 1032:1; a central directory claiming more
// than that lies, and trusting it would allocate without bound.
constexpr std::uint64_t kMaxDeflateRatio = 1100;

struct ZipCloser {
  void operator()(zip_t* z) const { zip_discard(z); }
};
struct ZipFileCloser {
  void operator()(zip_file_t* f) const { zip_fclose(f); }
};
using ZipPtr = std::unique_ptr<zip_t, ZipCloser>;

ZipPtr OpenArchive(const std::filesystem::path& path) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) raise(ExitCode::kMissing, "{}: file not found", path.string());
  if (std::filesystem::is_directory(path, ec)) raise(ExitCode::kBadData, "{}: is a directory, expected an .npz file", path.string());
  int err = 0;
  zip_t* z = zip_open(path.string().c_str(), ZIP_RDONLY, &err);
  if (z == nullptr) {
    zip_error_t ze;
    zip_error_init_with_code(&ze, err);
    std::string why = zip_error_strerror(&ze);
    zip_error_fini(&ze);
    raise(ExitCode::kBadData, "{}: not a readable .npz archive ({}; truncated or not a zip file?)", path.string(), why);
  }
  return ZipPtr(z);
}

std::string MemberName(const char* raw) {
  std::string name(raw);
  if (name.size() > 4 && name.compare(name.size() - 4, 4, ".npy") == 0) name.resize(name.size() - 4);
  return name;
}

// `archive_bytes` is the real size of the archive: libzip takes the directory's sizes on trust.
NdArray ReadMember(zip_t* z, zip_uint64_t index, const std::string& where, std::uint64_t archive_bytes) {
  zip_stat_t st;
  zip_stat_init(&st);
  if (zip_stat_index(z, index, 0, &st) != 0) raise(ExitCode::kBadData, "{}: cannot read the member's directory entry", where);
  const std::uint64_t size = (st.valid & ZIP_STAT_SIZE) ? st.size : 0;
  const std::uint64_t comp = (st.valid & ZIP_STAT_COMP_SIZE) ? st.comp_size : 0;
  // Bounding the compressed size by the archive's bytes bounds the claimed size by the ratio
  // check below, so a small file cannot make the payload buffer large.
  if (comp > archive_bytes) {
    raise(ExitCode::kBadData, "{}: archive claims {} compressed bytes but holds only {} (corrupt archive)", where, comp, archive_bytes);
  }
  if (size > comp * kMaxDeflateRatio + 4096) {
    raise(ExitCode::kBadData, "{}: archive claims {} bytes from {} compressed bytes (corrupt archive)", where, size, comp);
  }
  if ((st.valid & ZIP_STAT_COMP_METHOD) && st.comp_method == ZIP_CM_STORE && (st.valid & ZIP_STAT_COMP_SIZE) && size != comp) {
    raise(ExitCode::kBadData, "{}: stored member claims {} bytes but occupies {} (corrupt archive)", where, size, comp);
  }
  std::unique_ptr<zip_file_t, ZipFileCloser> f(zip_fopen_index(z, index, 0));
  if (!f) raise(ExitCode::kBadData, "{}: cannot open member ({})", where, zip_strerror(z));
  // Read the fixed prefix first so the header's declared size is checked before the payload
  // buffer is allocated.
  std::string bytes;
  bytes.resize(static_cast<std::size_t>(std::min<std::uint64_t>(size, 65536)));
  auto got = zip_fread(f.get(), bytes.data(), bytes.size());
  if (got < 0 || static_cast<std::uint64_t>(got) != bytes.size()) {
    raise(ExitCode::kBadData, "{}: member is truncated or corrupt ({})", where, zip_file_strerror(f.get()));
  }
  const NpyHeader header = ParseNpyHeader(bytes, size, where);
  const std::uint64_t need = header.header_bytes + header.payload_bytes;
  // Grow the buffer as inflated bytes actually arrive rather than to the claimed size at once:
  // a member whose directory and header both lie then costs only what it really inflates to.
  constexpr std::uint64_t kFirstChunk = std::uint64_t{1} << 20;
  while (bytes.size() < need) {
    const std::size_t have = bytes.size();
    const std::uint64_t grow = std::max<std::uint64_t>(kFirstChunk, have);
    const std::size_t next = static_cast<std::size_t>(std::min<std::uint64_t>(need, have + grow));
    bytes.resize(next);
    got = zip_fread(f.get(), bytes.data() + have, next - have);
    if (got < 0 || static_cast<std::uint64_t>(got) != next - have) {
      raise(ExitCode::kBadData, "{}: member is truncated or corrupt ({} of {} bytes inflated; {})", where,
            have + static_cast<std::size_t>(std::max<zip_int64_t>(got, 0)), need, zip_file_strerror(f.get()));
    }
  }
  return ParseNpy(std::string_view(bytes.data(), static_cast<std::size_t>(need)), where);
}

ArrayMap ReadMembers(zip_t* z, const std::string& file, std::uint64_t archive_bytes) {
  ArrayMap arrays;
  const zip_int64_t n = zip_get_num_entries(z, 0);
  for (zip_int64_t i = 0; i < n; ++i) {
    const char* raw = zip_get_name(z, static_cast<zip_uint64_t>(i), 0);
    if (raw == nullptr) continue;
    const std::string name = MemberName(raw);
    const std::string where = fmt::format("{} (member '{}')", file, name);
    // 'x' and 'x.npy' name the same array; keeping either silently would hide the other.
    if (arrays.count(name) != 0) raise(ExitCode::kBadData, "{}: array '{}' is stored twice in the archive", file, name);
    arrays[name] = ReadMember(z, static_cast<zip_uint64_t>(i), where, archive_bytes);
  }
  return arrays;
}

}  // namespace

ArrayMap ReadNpz(const std::filesystem::path& path) {
  ZipPtr z = OpenArchive(path);
  std::error_code ec;
  const std::uint64_t archive_bytes = std::filesystem::file_size(path, ec);
  if (ec) raise(ExitCode::kBadData, "{}: cannot read the file size ({})", path.string(), ec.message());
  return ReadMembers(z.get(), path.string(), archive_bytes);
}

ArrayMap ParseNpz(std::string_view bytes, const std::string& where) {
  zip_error_t ze;
  zip_error_init(&ze);
  zip_source_t* src = zip_source_buffer_create(bytes.data(), bytes.size(), 0, &ze);
  zip_t* z = src ? zip_open_from_source(src, ZIP_RDONLY, &ze) : nullptr;
  if (z == nullptr) {
    if (src) zip_source_free(src);  // still ours: zip_open_from_source failed
    std::string why = zip_error_strerror(&ze);
    zip_error_fini(&ze);
    raise(ExitCode::kBadData, "{}: not a readable .npz archive ({}; truncated or not a zip file?)", where, why);
  }
  zip_error_fini(&ze);
  ZipPtr owned(z);
  return ReadMembers(owned.get(), where, bytes.size());
}

std::vector<std::string> ListNpz(const std::filesystem::path& path) {
  ZipPtr z = OpenArchive(path);
  std::vector<std::string> names;
  const zip_int64_t n = zip_get_num_entries(z.get(), 0);
  for (zip_int64_t i = 0; i < n; ++i) {
    if (const char* raw = zip_get_name(z.get(), static_cast<zip_uint64_t>(i), 0)) names.push_back(MemberName(raw));
  }
  return names;
}

constexpr time_t kMemberTime = 1577880000;

void WriteNpz(const std::filesystem::path& path, const ArrayMap& arrays) {
  const std::filesystem::path tmp = path.string() + ".tmp";
  int err = 0;
  zip_t* z = zip_open(tmp.string().c_str(), ZIP_CREATE | ZIP_TRUNCATE, &err);
  if (z == nullptr) raise(ExitCode::kBadData, "{}: cannot create file", tmp.string());
  // libzip reads the buffers at zip_close, so they must outlive the archive handle.
  std::vector<std::string> images;
  images.reserve(arrays.size());
  for (const auto& [name, array] : arrays) {
    images.push_back(EncodeNpy(array));
    zip_source_t* src = zip_source_buffer(z, images.back().data(), images.back().size(), 0);
    const zip_int64_t idx = src ? zip_file_add(z, (name + ".npy").c_str(), src, ZIP_FL_OVERWRITE | ZIP_FL_ENC_UTF_8) : -1;
    if (idx < 0) {
      if (src) zip_source_free(src);
      zip_discard(z);
      raise(ExitCode::kBadData, "{}: cannot add member '{}'", tmp.string(), name);
    }
    zip_set_file_compression(z, static_cast<zip_uint64_t>(idx), ZIP_CM_STORE, 0);
    // A fixed member time (2020-01-01) keeps the archive a function of its arrays alone.
    zip_file_set_mtime(z, static_cast<zip_uint64_t>(idx), kMemberTime, 0);
  }
  if (zip_close(z) != 0) {
    std::string why = zip_strerror(z);
    zip_discard(z);
    raise(ExitCode::kBadData, "{}: cannot write archive ({})", tmp.string(), why);
  }
  std::error_code ec;
  std::filesystem::rename(tmp, path, ec);
  if (ec) raise(ExitCode::kBadData, "{}: cannot rename into place ({})", path.string(), ec.message());
}

}  // namespace plaudit::io
