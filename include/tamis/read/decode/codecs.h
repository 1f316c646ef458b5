// OpenCV's image codecs (libopencv_imgcodecs), loaded on first use.
//
// That library pulls in about 120 more (GDAL, HDF5, poppler, codecs for video
// frames...), and mapping them costs a process about 0.16 s on the project's
// machine: more than a warm audit of 640 photographs needs in all. tamis decodes
// JPEG with libjpeg-turbo, GIF and the common PNG itself, and encodes the report's
// thumbnails with libjpeg-turbo, so most runs never need the library; when a file
// does (TIFF, WebP, BMP, PNM, an unusual PNG) it is opened with dlopen, once, and
// the two functions used are looked up by their C++ names.
//
// Thread-safe. A build or installation whose library cannot be loaded throws
// std::runtime_error from the first call (a broken installation is not a bad file).
#pragma once

#include <cstdint>
#include <span>
#include <string>
#include <vector>

#include <opencv2/core.hpp>

namespace tamis {

// cv::imdecode(bytes, flags) (flags: cv::ImreadModes); an empty Mat when OpenCV
// cannot decode the bytes. OpenCV exceptions are caught and give an empty Mat.
cv::Mat opencv_imdecode(std::span<const uint8_t> bytes, int flags);

// cv::imencode(ext, image, out, params); false when OpenCV cannot encode.
bool opencv_imencode(const std::string& ext, const cv::Mat& image, std::vector<uint8_t>& out,
                     const std::vector<int>& params = {});

}  // namespace tamis
