#include "tamis/atomic_file.h"

#include <fcntl.h>
#include <signal.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <climits>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <stdexcept>
#include <string>
#include <thread>

namespace tamis {

namespace {

// The temporaries that exist right now, in fixed slots that a signal handler can
// read (no allocation, no locks): an interrupted run removes them before it dies.
constexpr int kSlots = 64;
struct Slot {
  std::atomic<int> state{0};  // 0 free, 1 being filled, 2 holds a path
  char path[PATH_MAX];
};
Slot g_slots[kSlots];

int register_temporary(const std::filesystem::path& p) {
  const std::string& s = p.native();
  if (s.size() >= PATH_MAX) return -1;
  for (int k = 0; k < kSlots; ++k) {
    int expected = 0;
    if (g_slots[k].state.compare_exchange_strong(expected, 1)) {
      std::memcpy(g_slots[k].path, s.c_str(), s.size() + 1);
      g_slots[k].state.store(2);
      return k;
    }
  }
  return -1;  // more at once than slots: this one is not cleaned up on a signal
}

void release_temporary(int slot) {
  if (slot >= 0) g_slots[slot].state.store(0);
}

void on_interrupt(int sig) {
  for (auto& s : g_slots)
    if (s.state.load() == 2) unlink(s.path);
  const char* msg = sig == SIGINT ? "tamis: interrupted; no output was changed\n"
                                  : "tamis: terminated; no output was changed\n";
  ssize_t ignored = ::write(STDERR_FILENO, msg, std::strlen(msg));
  (void)ignored;
  signal(sig, SIG_DFL);  // die of the signal, so the parent sees it
  raise(sig);
}

std::string cause() { return errno ? std::string(": ") + std::strerror(errno) : std::string(); }

// Writes `target`'s content to a temporary file beside it; returns its path and
// the registry slot it holds.
std::pair<std::filesystem::path, int> write_temporary(const std::filesystem::path& target,
                                                      const std::function<void(std::ostream&)>& write) {
  auto tmp = target;
  tmp += ".tmp-" + std::to_string(getpid());
  const int slot = register_temporary(tmp);
  errno = 0;
  std::ofstream os(tmp, std::ios::binary | std::ios::trunc);
  if (!os) {
    const std::string why = cause();
    release_temporary(slot);
    throw std::runtime_error("cannot write " + tmp.string() + why);
  }
  try {
    write(os);
  } catch (...) {
    os.close();
    std::remove(tmp.c_str());
    release_temporary(slot);
    throw;
  }
  errno = 0;
  os.flush();
  if (!os) {
    const std::string why = cause();
    os.close();
    std::remove(tmp.c_str());
    release_temporary(slot);
    throw std::runtime_error("cannot write " + tmp.string() + why);
  }
  return {tmp, slot};
}

void sync_file(const std::filesystem::path& p) {
  int fd = open(p.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd >= 0) {
    fsync(fd);
    close(fd);
  }
}

void put_in_place(const std::filesystem::path& tmp, const std::filesystem::path& target) {
  errno = 0;
  if (std::rename(tmp.c_str(), target.c_str()) != 0) {
    const std::string why = cause();
    std::remove(tmp.c_str());
    throw std::runtime_error("cannot rename into " + target.string() + why);
  }
}

}  // namespace

void install_interrupt_cleanup() {
  struct sigaction sa {};
  sa.sa_handler = on_interrupt;
  sigemptyset(&sa.sa_mask);
  sigaction(SIGINT, &sa, nullptr);
  sigaction(SIGTERM, &sa, nullptr);
}

size_t remove_stale_temporaries(const std::filesystem::path& dir, const std::vector<std::string>& names) {
  size_t removed = 0;
  std::error_code ec;
  for (const auto& e : std::filesystem::directory_iterator(dir, ec)) {
    const std::string file = e.path().filename().string();
    for (const auto& name : names) {
      const std::string prefix = name + ".tmp-";
      if (file.size() <= prefix.size() || file.compare(0, prefix.size(), prefix) != 0) continue;
      const std::string pid_text = file.substr(prefix.size());
      if (pid_text.find_first_not_of("0123456789") != std::string::npos || pid_text.size() > 9) continue;
      const long pid = std::stol(pid_text);
      // A live process's temporaries are its own business (two runs may share a folder).
      if (pid > 0 && (kill(static_cast<pid_t>(pid), 0) == 0 || errno == EPERM)) continue;
      std::error_code rm;
      if (std::filesystem::remove(e.path(), rm)) ++removed;
    }
  }
  return removed;
}

void write_file_atomically(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write) {
  const auto [tmp, slot] = write_temporary(target, write);
  sync_file(tmp);
  try {
    put_in_place(tmp, target);
  } catch (...) {
    release_temporary(slot);
    throw;
  }
  release_temporary(slot);
}

StagedFiles::~StagedFiles() {
  for (auto& t : syncs_) t.join();
  for (const auto& s : staged_) std::remove(s.tmp.c_str());
  for (const auto& s : staged_) release_temporary(s.slot);
}

void StagedFiles::write(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write) {
  auto [tmp, slot] = write_temporary(target, write);
  std::lock_guard<std::mutex> lock(mu_);
  staged_.push_back({tmp, target, slot});
  // The disk write starts now, while the other files are being made.
  syncs_.emplace_back([tmp] { sync_file(tmp); });
}

void StagedFiles::commit() {
  std::vector<Staged> files;
  std::vector<std::thread> syncs;
  {
    std::lock_guard<std::mutex> lock(mu_);
    files.swap(staged_);
    syncs.swap(syncs_);
  }
  for (auto& t : syncs) t.join();
  std::string failed;
  for (const auto& f : files) {
    try {
      put_in_place(f.tmp, f.target);
    } catch (const std::exception& e) {
      if (failed.empty()) failed = e.what();
    }
    release_temporary(f.slot);
  }
  if (!failed.empty()) throw std::runtime_error(failed);
}

}  // namespace tamis
