#include "tamis/read/preview.h"

#include <fcntl.h>

#include <algorithm>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "tamis/read/file_bytes.h"
#include "tamis/read/probe.h"

namespace tamis {

cv::Mat preview_image(const std::filesystem::path& file, uint32_t side, uint64_t max_bytes, const DecodeLimits& limits) {
  try {
    if (side == 0) return {};
    std::vector<uint8_t> bytes;
    if (!read_data_file(AT_FDCWD, file.string(), max_bytes, bytes)) return {};
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
