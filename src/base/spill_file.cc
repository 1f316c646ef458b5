#include "tamis/base/spill_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <stdexcept>
#include <string>

namespace tamis {
namespace {

[[noreturn]] void fail(const std::filesystem::path& dir, const char* what, int err) {
  throw std::runtime_error(std::string("scratch file in ") + dir.string() + ": " + what + ": " + std::strerror(err));
}

}  // namespace

SpillFile::SpillFile(const std::filesystem::path& dir, uint64_t size) : size_(size), dir_(dir) {
  fd_ = ::open(dir.c_str(), O_TMPFILE | O_RDWR | O_CLOEXEC, 0600);
  if (fd_ < 0) {
    // No O_TMPFILE on this file system (or kernel): a named file, unlinked at once.
    std::string name = (dir / ".tamis-scratch-XXXXXX").string();
    fd_ = ::mkostemp(name.data(), O_CLOEXEC);
    if (fd_ < 0) fail(dir, "cannot create", errno);
    ::unlink(name.c_str());
  }
  if (::ftruncate(fd_, static_cast<off_t>(size)) != 0) {
    const int err = errno;
    ::close(fd_);
    fd_ = -1;
    fail(dir, "cannot size", err);
  }
  // The space is reserved now, so that a full file system shows here, where the
  // caller can still do without the file, and not in a later write.
  if (size > 0) {
    const int err = ::posix_fallocate(fd_, 0, static_cast<off_t>(size));
    if (err != 0) {
      ::close(fd_);
      fd_ = -1;
      fail(dir, "cannot reserve space", err);
    }
  }
}

SpillFile::~SpillFile() {
  if (fd_ >= 0) ::close(fd_);
}

void SpillFile::write_at(uint64_t offset, const void* data, size_t bytes) {
  if (offset > size_ || bytes > size_ - offset) throw std::logic_error("SpillFile::write_at past the end");
  const char* p = static_cast<const char*>(data);
  while (bytes > 0) {
    const ssize_t n = ::pwrite(fd_, p, bytes, static_cast<off_t>(offset));
    if (n < 0) {
      if (errno == EINTR) continue;
      fail(dir_, "cannot write", errno);
    }
    if (n == 0) fail(dir_, "cannot write", ENOSPC);
    p += n;
    offset += static_cast<uint64_t>(n);
    bytes -= static_cast<size_t>(n);
  }
}

void SpillFile::read_at(uint64_t offset, void* data, size_t bytes) const {
  if (offset > size_ || bytes > size_ - offset) throw std::logic_error("SpillFile::read_at past the end");
  char* p = static_cast<char*>(data);
  while (bytes > 0) {
    const ssize_t n = ::pread(fd_, p, bytes, static_cast<off_t>(offset));
    if (n < 0) {
      if (errno == EINTR) continue;
      fail(dir_, "cannot read", errno);
    }
    if (n == 0) fail(dir_, "cannot read", EIO);  // shorter than it was sized: someone truncated it
    p += n;
    offset += static_cast<uint64_t>(n);
    bytes -= static_cast<size_t>(n);
  }
}

}  // namespace tamis
