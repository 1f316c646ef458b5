// Test support: a temporary folder removed on destruction, and small file writers.
#pragma once

#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

namespace tamis::test {

class TempDir {
 public:
  TempDir();
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  const std::filesystem::path& path() const { return path_; }
  std::filesystem::path operator/(const std::string& rel) const { return path_ / rel; }

 private:
  std::filesystem::path path_;
};

void write_bytes(const std::filesystem::path& p, const std::vector<uint8_t>& bytes);
void write_text(const std::filesystem::path& p, const std::string& text);
std::vector<uint8_t> read_bytes(const std::filesystem::path& p);

// Folder for data the tests build once and reuse ($TAMIS_TEST_DATA/cache), created on demand.
std::filesystem::path test_cache_dir();

// Value of an environment variable, or "" when unset.
std::string env_or_empty(const char* name);

}  // namespace tamis::test
