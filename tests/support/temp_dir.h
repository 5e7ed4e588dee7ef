#pragma once
// A scratch directory under the system temporary directory, removed with everything in it
// when the object goes out of scope. Names are unique per process and per object, so tests
// that run in parallel processes never share one.
#include <atomic>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <system_error>

#include <unistd.h>

namespace plaudit::testing {

class TempDir {
 public:
  explicit TempDir(const std::string& label = "test") {
    static std::atomic<std::uint64_t> counter{0};
    const auto base = std::filesystem::temp_directory_path();
    std::random_device entropy;  // names only; no test result depends on it
    for (int attempt = 0; attempt < 100; ++attempt) {
      const auto name = "plaudit-" + label + "-" + std::to_string(::getpid()) + "-" +
                        std::to_string(counter.fetch_add(1)) + "-" + std::to_string(entropy() % 1000000u);
      std::error_code ec;
      if (std::filesystem::create_directory(base / name, ec)) {
        path_ = base / name;
        return;
      }
    }
    throw std::runtime_error("cannot create a temporary directory under " + base.string());
  }
  ~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;

  const std::filesystem::path& path() const { return path_; }
  std::filesystem::path operator/(const std::string& name) const { return path_ / name; }

  // Write `bytes` to `name` (creating parent directories) and return its path.
  std::filesystem::path Write(const std::string& name, const std::string& bytes) const {
    const auto target = path_ / name;
    std::filesystem::create_directories(target.parent_path());
    std::ofstream out(target, std::ios::binary | std::ios::trunc);
    out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
    if (!out) throw std::runtime_error("cannot write " + target.string());
    return target;
  }

 private:
  std::filesystem::path path_;
};

// The whole content of a file, as bytes.
inline std::string ReadBytes(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw std::runtime_error("cannot read " + path.string());
  return std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
}

}  // namespace plaudit::testing
