#include "tamis/read/preview.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "tamis/read/probe.h"

namespace tamis {

cv::Mat preview_image(const std::filesystem::path& file, uint32_t side, const DecodeLimits& limits) {
  try {
    if (side == 0) return {};
    // The file itself, never what a link put there since the walk points to
    // (the walk follows no link either): O_NOFOLLOW, a regular file only.
    const int fd = ::open(file.c_str(), O_RDONLY | O_NOFOLLOW | O_CLOEXEC);
    if (fd < 0) return {};
    std::vector<uint8_t> bytes;
    struct stat st {};
    bool ok = ::fstat(fd, &st) == 0 && S_ISREG(st.st_mode) && st.st_size > 0 && uint64_t(st.st_size) <= (uint64_t{1} << 31);
    if (ok) {
      bytes.resize(static_cast<size_t>(st.st_size));
      size_t got = 0;
      while (ok && got < bytes.size()) {
        const ssize_t n = ::read(fd, bytes.data() + got, bytes.size() - got);
        if (n < 0 && errno == EINTR) continue;
        if (n <= 0) ok = false;
        else got += static_cast<size_t>(n);
      }
    }
    ::close(fd);
    if (!ok) return {};
    const ProbeOutcome probe = probe_bytes(bytes);
    if (probe.defect != Defect::none) return {};
    DecodeLimits l = limits;
    l.reduced_side = side;
    const Decoded d = decode_image(bytes, probe.info, l);
    if (d.defect != Defect::none || d.reduced.empty()) return {};
    cv::Mat bgr;
    if (d.reduced.channels() == 1) cv::cvtColor(d.reduced, bgr, cv::COLOR_GRAY2BGR);
    else if (d.reduced.channels() == 3) bgr = d.reduced;
    else return {};
    const int longer = std::max(bgr.cols, bgr.rows);
    if (longer <= int(side)) return bgr.clone();
    const double f = double(side) / longer;
    cv::Mat out;
    cv::resize(bgr, out, cv::Size(std::max(1, int(std::lround(bgr.cols * f))), std::max(1, int(std::lround(bgr.rows * f)))), 0, 0,
               cv::INTER_AREA);
    return out;
  } catch (...) {
    return {};
  }
}

}  // namespace tamis
