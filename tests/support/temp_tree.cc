#include "temp_tree.h"

#include <unistd.h>

#include <cstdlib>
#include <fstream>
#include <stdexcept>

namespace tamis::test {

TempDir::TempDir() {
  std::string tmpl = (std::filesystem::temp_directory_path() / "tamis-test-XXXXXX").string();
  if (!mkdtemp(tmpl.data())) throw std::runtime_error("mkdtemp failed");
  path_ = tmpl;
}

TempDir::~TempDir() {
  std::error_code ec;
  // Make sure unreadable folders made by a test can be removed.
  for (auto it = std::filesystem::recursive_directory_iterator(path_, ec); !ec && it != decltype(it)(); it.increment(ec))
    if (it->is_directory(ec) && !it->is_symlink(ec))
      std::filesystem::permissions(it->path(), std::filesystem::perms::owner_all, std::filesystem::perm_options::add, ec);
  std::filesystem::remove_all(path_, ec);
}

void write_bytes(const std::filesystem::path& p, const std::vector<uint8_t>& bytes) {
  std::filesystem::create_directories(p.parent_path());
  std::ofstream os(p, std::ios::binary);
  os.write(reinterpret_cast<const char*>(bytes.data()), static_cast<std::streamsize>(bytes.size()));
  if (!os) throw std::runtime_error("cannot write " + p.string());
}

void write_text(const std::filesystem::path& p, const std::string& text) {
  write_bytes(p, std::vector<uint8_t>(text.begin(), text.end()));
}

std::vector<uint8_t> read_bytes(const std::filesystem::path& p) {
  std::ifstream is(p, std::ios::binary);
  if (!is) throw std::runtime_error("cannot read " + p.string());
  return std::vector<uint8_t>(std::istreambuf_iterator<char>(is), {});
}

std::filesystem::path test_cache_dir() {
  std::string env = env_or_empty("TAMIS_TEST_DATA");
  std::filesystem::path p = env.empty() ? std::filesystem::temp_directory_path() / "tamis-test-cache"
                                        : std::filesystem::path(env) / "cache";
  std::filesystem::create_directories(p);
  return p;
}

std::string env_or_empty(const char* name) {
  const char* v = std::getenv(name);
  return v ? std::string(v) : std::string();
}

}  // namespace tamis::test
