// Helpers shared by the libFuzzer targets (tests/fuzz/README in DEVELOPERS.md):
// a file that holds the input, for readers that take a path.
#pragma once

#include <sys/mman.h>
#include <unistd.h>

#include <cstddef>
#include <cstdint>
#include <string>

namespace tamis::fuzz {

// The input as a file: an anonymous in-memory file (memfd), named by its
// /proc/self/fd path; closed when the object goes.
class InputFile {
 public:
  InputFile(const uint8_t* data, size_t size) : fd_(memfd_create("tamis-fuzz", MFD_CLOEXEC)) {
    size_t done = 0;
    while (fd_ >= 0 && done < size) {
      const ssize_t n = ::write(fd_, data + done, size - done);
      if (n <= 0) break;
      done += static_cast<size_t>(n);
    }
  }
  ~InputFile() {
    if (fd_ >= 0) close(fd_);
  }
  InputFile(const InputFile&) = delete;
  InputFile& operator=(const InputFile&) = delete;
  bool ok() const { return fd_ >= 0; }
  std::string path() const { return "/proc/self/fd/" + std::to_string(fd_); }

 private:
  int fd_;
};

}  // namespace tamis::fuzz
