#include "tamis/atomic_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <cstdio>
#include <fstream>
#include <stdexcept>
#include <string>
#include <thread>

namespace tamis {

namespace {

// Writes `target`'s content to a temporary file beside it; returns its path.
std::filesystem::path write_temporary(const std::filesystem::path& target,
                                      const std::function<void(std::ostream&)>& write) {
  auto tmp = target;
  tmp += ".tmp-" + std::to_string(getpid());
  std::ofstream os(tmp, std::ios::binary | std::ios::trunc);
  if (!os) throw std::runtime_error("cannot write " + tmp.string());
  try {
    write(os);
  } catch (...) {
    os.close();
    std::remove(tmp.c_str());
    throw;
  }
  os.flush();
  if (!os) {
    os.close();
    std::remove(tmp.c_str());
    throw std::runtime_error("cannot write " + tmp.string());
  }
  return tmp;
}

void sync_file(const std::filesystem::path& p) {
  int fd = open(p.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd >= 0) {
    fsync(fd);
    close(fd);
  }
}

void put_in_place(const std::filesystem::path& tmp, const std::filesystem::path& target) {
  if (std::rename(tmp.c_str(), target.c_str()) != 0) {
    std::remove(tmp.c_str());
    throw std::runtime_error("cannot rename into " + target.string());
  }
}

}  // namespace

void write_file_atomically(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write) {
  const auto tmp = write_temporary(target, write);
  sync_file(tmp);
  put_in_place(tmp, target);
}

StagedFiles::~StagedFiles() {
  for (auto& t : syncs_) t.join();
  for (const auto& [tmp, target] : staged_) std::remove(tmp.c_str());
}

void StagedFiles::write(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write) {
  auto tmp = write_temporary(target, write);
  std::lock_guard<std::mutex> lock(mu_);
  staged_.emplace_back(tmp, target);
  // The disk write starts now, while the other files are being made.
  syncs_.emplace_back([tmp] { sync_file(tmp); });
}

void StagedFiles::commit() {
  std::vector<std::pair<std::filesystem::path, std::filesystem::path>> files;
  std::vector<std::thread> syncs;
  {
    std::lock_guard<std::mutex> lock(mu_);
    files.swap(staged_);
    syncs.swap(syncs_);
  }
  for (auto& t : syncs) t.join();
  std::string failed;
  for (const auto& [tmp, target] : files) {
    try {
      put_in_place(tmp, target);
    } catch (const std::exception& e) {
      if (failed.empty()) failed = e.what();
    }
  }
  if (!failed.empty()) throw std::runtime_error(failed);
}

}  // namespace tamis
