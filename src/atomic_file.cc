#include "tamis/atomic_file.h"

#include <fcntl.h>
#include <unistd.h>

#include <cstdio>
#include <fstream>
#include <stdexcept>
#include <string>

namespace tamis {

void write_file_atomically(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write) {
  auto tmp = target;
  tmp += ".tmp-" + std::to_string(getpid());
  {
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
  }
  int fd = open(tmp.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd >= 0) {
    fsync(fd);
    close(fd);
  }
  if (std::rename(tmp.c_str(), target.c_str()) != 0) {
    std::remove(tmp.c_str());
    throw std::runtime_error("cannot rename into " + target.string());
  }
}

}  // namespace tamis
