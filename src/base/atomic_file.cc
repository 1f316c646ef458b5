#include "tamis/base/atomic_file.h"

#include <fcntl.h>
#include <signal.h>
#include <sys/stat.h>
#include <unistd.h>
#include <xxhash.h>

#include <atomic>
#include <cerrno>
#include <climits>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <iterator>
#include <map>
#include <set>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include "tamis/base/text.h"

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

// Fault injection for the tests of whole output sets (docs/outputs.md): the
// environment variable TAMIS_FAULT=STEP:N:ACTION makes the N-th (from 1) step of
// that kind in this process fail as with EIO (ACTION "fail") or kill the process
// with SIGKILL there (ACTION "kill"). Steps: "write" (a temporary file's bytes
// flushed), "sync" (a temporary's fsync), "unlink" (the old set file removed),
// "rename" (a temporary renamed into place), "set" (the set file's rename). Unset
// in normal use: one getenv at the first step.
bool fault(const char* step) {
  struct Plan {
    std::string step, action;
    long n = 0;
    std::map<std::string, long> seen;
    std::mutex mu;
  };
  static Plan* plan = [] {
    const char* v = std::getenv("TAMIS_FAULT");
    if (!v) return static_cast<Plan*>(nullptr);
    const std::string text = v;
    const size_t a = text.find(':'), b = a == std::string::npos ? a : text.find(':', a + 1);
    if (b == std::string::npos) return static_cast<Plan*>(nullptr);
    auto* p = new Plan;
    p->step = text.substr(0, a);
    p->n = std::atol(text.substr(a + 1, b - a - 1).c_str());
    p->action = text.substr(b + 1);
    return p;
  }();
  if (!plan || plan->step != step) return false;
  std::lock_guard<std::mutex> lock(plan->mu);
  if (++plan->seen[step] != plan->n) return false;
  if (plan->action == "kill") raise(SIGKILL);
  errno = EIO;
  return true;
}

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
  if (fault("write")) os.setstate(std::ios::badbit);
  if (!os) {
    const std::string why = cause();
    os.close();
    std::remove(tmp.c_str());
    release_temporary(slot);
    throw std::runtime_error("cannot write " + tmp.string() + why);
  }
  return {tmp, slot};
}

// fsyncs a file or a folder; the errno of a failure (0 when it worked).
int sync_path(const std::filesystem::path& p, const char* step = "sync") {
  if (fault(step)) return errno;
  const int fd = open(p.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return errno;
  const int r = fsync(fd) == 0 ? 0 : errno;
  close(fd);
  return r;
}

void put_in_place(const std::filesystem::path& tmp, const std::filesystem::path& target, const char* step = "rename") {
  errno = 0;
  if (fault(step) || std::rename(tmp.c_str(), target.c_str()) != 0) {
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
  if (const int e = sync_path(tmp)) {
    std::remove(tmp.c_str());
    release_temporary(slot);
    throw std::runtime_error("cannot write " + tmp.string() + ": " + std::strerror(e));
  }
  try {
    put_in_place(tmp, target);
  } catch (...) {
    release_temporary(slot);
    throw;
  }
  release_temporary(slot);
}

int hash_file(const std::filesystem::path& p, uint64_t& bytes, uint64_t& hash) {
  const int fd = open(p.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return errno;
  XXH3_state_t* st = XXH3_createState();
  XXH3_64bits_reset(st);
  std::vector<char> buf(1 << 20);
  int err = 0;
  bytes = 0;
  for (;;) {
    const ssize_t n = ::read(fd, buf.data(), buf.size());
    if (n < 0) {
      if (errno == EINTR) continue;
      err = errno;
      break;
    }
    if (n == 0) break;
    XXH3_64bits_update(st, buf.data(), static_cast<size_t>(n));
    bytes += static_cast<uint64_t>(n);
  }
  hash = XXH3_64bits_digest(st);
  XXH3_freeState(st);
  close(fd);
  return err;
}


StagedFiles::~StagedFiles() {
  for (auto& t : syncs_) t.join();
  for (const auto& s : staged_) std::remove(s.tmp.c_str());
  for (const auto& s : staged_) release_temporary(s.slot);
}

void StagedFiles::write(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write) {
  const std::pair<std::filesystem::path, int> written = write_temporary(target, write);
  const std::filesystem::path tmp = written.first;  // a variable, not a binding: lambdas capture it (clang 14)
  std::lock_guard<std::mutex> lock(mu_);
  staged_.push_back({tmp, target, written.second, 0, 0, 0});
  // The disk write starts now, while the other files are being made; the same
  // thread first reads the file back for the set file's size and hash.
  const size_t index = staged_.size() - 1;
  syncs_.emplace_back([this, tmp, index] {
    uint64_t bytes = 0, hash = 0;
    int e = hash_file(tmp, bytes, hash);
    if (!e) e = sync_path(tmp);
    std::lock_guard<std::mutex> l(mu_);
    staged_[index].bytes = bytes;
    staged_[index].hash = hash;
    staged_[index].error = e;
  });
}

void StagedFiles::commit(const std::filesystem::path& set_file) {
  std::vector<std::thread> syncs;
  {
    std::lock_guard<std::mutex> lock(mu_);
    syncs.swap(syncs_);
  }
  for (auto& t : syncs) t.join();
  // Nothing is renamed until every file is on disk and every target can take
  // it: a failure up to here leaves the previous set as it was (the destructor
  // removes the temporaries).
  for (const auto& f : staged_)
    if (f.error) throw std::runtime_error("cannot write " + f.tmp.string() + ": " + std::strerror(f.error));
  for (const auto& f : staged_) {
    struct stat st {};
    if (lstat(f.target.c_str(), &st) == 0 && !S_ISREG(st.st_mode))
      throw std::runtime_error("cannot put " + f.target.string() + " in place: " +
                               (S_ISDIR(st.st_mode) ? "a folder" : "something that is not a file") + " has that name");
  }
  std::set<std::filesystem::path> folders;
  for (const auto& f : staged_) folders.insert(f.target.parent_path().empty() ? "." : f.target.parent_path());
  // The set file goes first: from here until the new one is written last, the
  // folder has no set file, so a reader can tell a set being replaced (or one
  // whose replacing was killed) from a whole one.
  std::string old_set;  // the old set file's bytes: put back if no file gets renamed
  bool had_set = false;
  if (!set_file.empty()) {
    std::ifstream in(set_file, std::ios::binary);
    if (in) {
      old_set.assign(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
      had_set = !in.bad();
    }
    errno = 0;
    if (fault("unlink") || (std::remove(set_file.c_str()) != 0 && errno != ENOENT))
      throw std::runtime_error("cannot remove " + set_file.string() + cause());
    for (const auto& d : folders) sync_path(d, "dirsync");
  }
  std::vector<Staged> files;
  files.swap(staged_);
  std::string failed;
  size_t renamed = 0;
  for (const auto& f : files) {
    try {
      if (failed.empty()) {
        put_in_place(f.tmp, f.target);
        ++renamed;
      } else {
        std::remove(f.tmp.c_str());
      }
    } catch (const std::exception& e) {
      failed = e.what();
    }
    release_temporary(f.slot);
  }
  if (!failed.empty()) {
    if (renamed == 0 && had_set) {  // nothing changed: the old set is still whole
      try {
        write_file_atomically(set_file, [&](std::ostream& os) { os << old_set; });
      } catch (const std::exception&) {
      }
    }
    throw std::runtime_error(failed);
  }
  for (const auto& d : folders) sync_path(d, "dirsync");
  if (set_file.empty()) return;
  // The set file: each file's name (relative to the set file's folder when it
  // lies there), size and XXH3-64, sorted by name; written last, atomically.
  std::vector<std::pair<std::string, std::pair<uint64_t, uint64_t>>> rows;
  for (const auto& f : files) {
    const bool beside = f.target.parent_path() == set_file.parent_path();
    rows.push_back({beside ? f.target.filename().string() : std::filesystem::absolute(f.target).string(), {f.bytes, f.hash}});
  }
  std::sort(rows.begin(), rows.end());
  std::string text = "{\"format\":\"tamis output set\",\"version\":1,\"files\":[";
  for (size_t k = 0; k < rows.size(); ++k) {
    if (k) text += ",";
    std::string name;
    for (char c : rows[k].first) {
      if (c == '"' || c == '\\') name += '\\';
      if (static_cast<unsigned char>(c) < 0x20) continue;
      name += c;
    }
    text += "\n{\"name\":\"" + name + "\",\"bytes\":" + std::to_string(rows[k].second.first) + ",\"xxh3_64\":\"" +
            hex64(rows[k].second.second) + "\"}";
  }
  text += "]}\n";
  const auto [tmp, slot] = write_temporary(set_file, [&](std::ostream& os) { os << text; });
  if (const int e = sync_path(tmp)) {
    std::remove(tmp.c_str());
    release_temporary(slot);
    throw std::runtime_error("cannot write " + tmp.string() + ": " + std::strerror(e));
  }
  try {
    put_in_place(tmp, set_file, "set");
  } catch (...) {
    release_temporary(slot);
    throw;
  }
  release_temporary(slot);
  sync_path(set_file.parent_path().empty() ? "." : set_file.parent_path(), "dirsync");
}

}  // namespace tamis
