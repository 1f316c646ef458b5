#include "tamis/read/file_bytes.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>

namespace tamis {

int open_data_file(int dirfd, const std::string& rel) {
  return openat(dirfd, rel.c_str(), O_RDONLY | O_NOFOLLOW | O_CLOEXEC | O_NOCTTY | O_NONBLOCK);
}

bool read_whole(int fd, uint64_t expect, std::vector<uint8_t>& buf) {
  if (fd < 0) return false;
  buf.resize(expect + 1);
  size_t got = 0;
  while (got <= expect) {
    const size_t want = expect + 1 - got;
    ssize_t n = read(fd, buf.data() + got, want);
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) return false;
    got += static_cast<size_t>(n);
    if (n == 0 || static_cast<size_t>(n) < want) break;  // the end of the file
  }
  if (got != expect) return false;
  buf.resize(expect);
  return true;
}

bool read_data_file(int dirfd, const std::string& rel, uint64_t max_bytes, std::vector<uint8_t>& buf) {
  const int fd = open_data_file(dirfd, rel);
  if (fd < 0) return false;
  struct stat st {};
  const bool ok = fstat(fd, &st) == 0 && S_ISREG(st.st_mode) && st.st_size > 0 && uint64_t(st.st_size) <= max_bytes &&
                  read_whole(fd, uint64_t(st.st_size), buf);
  close(fd);
  return ok;
}

}  // namespace tamis
