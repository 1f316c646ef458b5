// Test support: real photographs from Debian's visp-images-data (the ViSP project's
// test images) and the kinds of copies a data set picks up (re-encoded, resized,
// gray, mirrored, turned).
#pragma once

#include <filesystem>
#include <functional>
#include <string>
#include <vector>

#include <opencv2/core.hpp>

namespace tamis::test {

inline const std::filesystem::path kVispDir = "/usr/share/visp-images-data/ViSP-images";

// Distinct photographs (each path relative to kVispDir; source noted in photos.cc).
const std::vector<std::string>& distinct_photographs();

struct CopyKind {
  std::string name;
  std::function<cv::Mat(const cv::Mat&)> make;  // the copied pixels
  int jpeg_quality;                              // 0: save as PNG
};

// The copies the look-alike search must find (docs/lookalikes.md lists them).
const std::vector<CopyKind>& copy_kinds();

// Encodes as the kind says (JPEG at its quality, or PNG).
std::vector<uint8_t> encode_copy(const cv::Mat& pixels, int jpeg_quality);

}  // namespace tamis::test
