#include "photos.h"

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

namespace tamis::test {

const std::vector<std::string>& distinct_photographs() {
  // visp-images-data: a photograph of Klimt's "The Kiss", the 1927 Solvay conference
  // group photograph, a calibration grid photographed with a camera, and camera frames
  // of three different tracking scenes.
  static const std::vector<std::string> p{
      "Klimt/Klimt.ppm",
      "Solvay/Solvay_conference_1927_Version2_1024x705.jpg",
      "calibration/grid36-01.pgm",
      "cube/image.0001.pgm",
      "mire-2/image.0001.pgm",
      "mbt-depth/castel/castel/image_0000.pgm",
  };
  return p;
}

const std::vector<CopyKind>& copy_kinds() {
  auto resize = [](double f) {
    return [f](const cv::Mat& m) {
      cv::Mat o;
      cv::resize(m, o, cv::Size(), f, f, cv::INTER_AREA);
      return o;
    };
  };
  auto rotate = [](int code) {
    return [code](const cv::Mat& m) {
      cv::Mat o;
      cv::rotate(m, o, code);
      return o;
    };
  };
  auto same = [](const cv::Mat& m) { return m.clone(); };
  static const std::vector<CopyKind> k{
      {"jpeg-q15", same, 15},
      {"jpeg-q40", same, 40},
      {"half-size", resize(0.5), 90},
      {"quarter-size-png", resize(0.25), 0},
      {"gray", [](const cv::Mat& m) {
         cv::Mat o;
         if (m.channels() == 3) cv::cvtColor(m, o, cv::COLOR_BGR2GRAY); else o = m.clone();
         return o;
       }, 85},
      {"mirror", [](const cv::Mat& m) { cv::Mat o; cv::flip(m, o, 1); return o; }, 90},
      {"upside-down", [](const cv::Mat& m) { cv::Mat o; cv::flip(m, o, 0); return o; }, 90},
      {"turn-90", rotate(cv::ROTATE_90_CLOCKWISE), 90},
      {"turn-180", rotate(cv::ROTATE_180), 90},
      {"turn-270", rotate(cv::ROTATE_90_COUNTERCLOCKWISE), 90},
      {"mirror-half-q30", [](const cv::Mat& m) {
         cv::Mat o, h;
         cv::flip(m, o, 1);
         cv::resize(o, h, cv::Size(), 0.5, 0.5, cv::INTER_AREA);
         return h;
       }, 30},
      {"brighter", [](const cv::Mat& m) { cv::Mat o; m.convertTo(o, -1, 1.0, 25); return o; }, 90},
  };
  return k;
}

std::vector<uint8_t> encode_copy(const cv::Mat& pixels, int jpeg_quality) {
  std::vector<uchar> buf;
  if (jpeg_quality > 0)
    cv::imencode(".jpg", pixels, buf, {cv::IMWRITE_JPEG_QUALITY, jpeg_quality});
  else
    cv::imencode(".png", pixels, buf);
  return std::vector<uint8_t>(buf.begin(), buf.end());
}

}  // namespace tamis::test
