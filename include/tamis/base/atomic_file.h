// Atomic output files: write under a temporary name in the target folder, then
// rename into place, so a reader (or a killed run) never sees half a file.
#pragma once

#include <filesystem>
#include <cstdint>
#include <functional>
#include <mutex>
#include <ostream>
#include <thread>
#include <utility>
#include <vector>

namespace tamis {

// Calls `write` with a stream to a temporary file beside `target`, flushes and
// fsyncs it, then renames it to `target`. On any failure the temporary file is
// removed and std::runtime_error is thrown; `target` is then left as it was.
void write_file_atomically(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write);

// SIGINT and SIGTERM: every temporary file that exists at that moment is removed,
// a line on stderr says so, and the process dies of the signal (exit status 128 +
// signal number in a shell). Outputs already renamed into place stay; a set not
// yet committed leaves the previous outputs as they were. Call once, from main.
void install_interrupt_cleanup();

// A file's size and XXH3-64 (the set file's hash), read whole. Returns an errno
// (0: fine). (Output files are hashed as they are read back before their fsync.)
int hash_file(const std::filesystem::path& p, uint64_t& bytes, uint64_t& hash);

// Removes `dir`'s temporaries of the named files (NAME.tmp-PID) whose process no
// longer runs: what a killed run (SIGKILL, power loss) left. Returns how many.
size_t remove_stale_temporaries(const std::filesystem::path& dir, const std::vector<std::string>& names);

// Several output files put in place together: each is written under a temporary
// name (from any thread) and its fsync starts at once on a thread of its own (the
// wait for the disk overlaps the making of the next file). commit() waits for
// them all and checks, before renaming anything, that every fsync worked and that
// no target is a folder or another non-file; a failure up to there leaves the
// previous files as they were (temporaries never committed are removed when the
// set is destroyed). Then, when `set_file` is given, the old set file is removed,
// each file is renamed into place, and the new set file (JSON: each file's name,
// size and XXH3-64, docs/outputs.md) is written last, atomically: a folder with a
// set file whose list matches its files holds one whole set; a folder without one
// is being replaced or its replacing was stopped. A file whose writing failed
// throws from write(). Fault injection for tests: TAMIS_FAULT (atomic_file.cc).
class StagedFiles {
 public:
  StagedFiles() = default;
  StagedFiles(const StagedFiles&) = delete;
  StagedFiles& operator=(const StagedFiles&) = delete;
  ~StagedFiles();
  void write(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write);
  void commit(const std::filesystem::path& set_file = {});

 private:
  struct Staged {
    std::filesystem::path tmp, target;
    int slot;  // its place in the registry of temporaries removed on a signal
    uint64_t bytes, hash;  // what was written: size and XXH3-64
    int error;             // errno of reading it back or of its fsync (0: fine)
  };
  std::mutex mu_;
  std::vector<Staged> staged_;
  std::vector<std::thread> syncs_;
};

}  // namespace tamis
