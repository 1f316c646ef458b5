// A private scratch file for working data that would not fit the memory goals
// (the look-alike thumbnails of a large tree, model/record.h ThumbnailTable).
//
// Contract:
// - The file has no name: opened with O_TMPFILE where the file system has it,
//   otherwise created under a random name and unlinked at once. No run leaves
//   it behind, whatever ends the process, and no other process can open it.
// - It is sized at creation and its space reserved then (posix_fallocate), so a
//   full or read-only file system fails the constructor, not a later write;
//   bytes never written read as zeros.
// - write_at and read_at may be called from any thread at once (pwrite/pread);
//   ranges written concurrently must not overlap.
// - Every failure throws std::runtime_error naming the folder and the system's
//   cause (errno text): no space left, a read-only file system, an I/O error.
// The caller chooses the folder, and keeps it out of ROOT (read_stage.cc).
#pragma once

#include <cstddef>
#include <cstdint>
#include <filesystem>

namespace tamis {

class SpillFile {
 public:
  SpillFile(const std::filesystem::path& dir, uint64_t size);
  ~SpillFile();
  SpillFile(const SpillFile&) = delete;
  SpillFile& operator=(const SpillFile&) = delete;

  void write_at(uint64_t offset, const void* data, size_t bytes);
  void read_at(uint64_t offset, void* data, size_t bytes) const;  // REQUIRES offset + bytes <= size()
  uint64_t size() const { return size_; }

 private:
  int fd_ = -1;
  uint64_t size_ = 0;
  std::filesystem::path dir_;
};

}  // namespace tamis
