// Header probe tests.
#include <catch2/catch.hpp>

#include <filesystem>
#include <regex>
#include <set>
#include <vector>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/temp_tree.h"
#include "tamis/read/jpeg_quality.h"
#include "tamis/read/probe.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {
ProbeOutcome probe_file(const fs::path& p) {
  auto bytes = test::read_bytes(p);
  return probe_bytes(bytes);
}
std::vector<uint8_t> encode(const cv::Mat& m, const std::string& ext, const std::vector<int>& params = {}) {
  std::vector<uchar> buf;
  REQUIRE(cv::imencode(ext, m, buf, params));
  return std::vector<uint8_t>(buf.begin(), buf.end());
}
cv::Mat gradient(int w, int h, int type) {
  cv::Mat m(h, w, type);
  cv::randu(m, cv::Scalar::all(0), cv::Scalar::all(255));
  return m;
}
}  // namespace

// Source: PngSuite, Willem van Schaik's PNG test suite, as shipped (a subset) in
// Debian's libjxl-testdata. Its file names encode the PNG colour type (a digit)
// and bit depth (two digits) just before the extension, e.g. ccwn2c08 = colour
// type 2, 8 bits; the probe must read the same from the IHDR chunk.
TEST_CASE("probe reads colour type and bit depth that PngSuite names encode", "[probe][pngsuite]") {
  const fs::path dir = "/usr/share/libjxl-testdata/external/pngsuite";
  REQUIRE(fs::is_directory(dir));
  const std::regex name_rule(R"(([0-6])[gcpa](\d\d)$)");
  int checked = 0;
  for (const auto& e : fs::directory_iterator(dir)) {
    if (e.path().extension() != ".png") continue;
    std::smatch m;
    std::string stem = e.path().stem().string();
    REQUIRE(std::regex_search(stem, m, name_rule));
    int colour_type = std::stoi(m[1]);
    int depth = std::stoi(m[2]);
    ColorMode expect = colour_type == 0   ? ColorMode::gray
                       : colour_type == 2 ? ColorMode::rgb
                       : colour_type == 3 ? ColorMode::palette
                       : colour_type == 4 ? ColorMode::graya
                                          : ColorMode::rgba;
    INFO(stem);
    ProbeOutcome p = probe_file(e.path());
    CHECK(p.defect == Defect::none);
    CHECK(p.info.format == Format::png);
    CHECK(p.info.mode == expect);
    CHECK(int(p.info.bit_depth) == depth);
    CHECK(p.info.width == 32);  // every PngSuite image is 32x32 (PngSuite.README)
    CHECK(p.info.height == 32);
    ++checked;
  }
  CHECK(checked >= 8);
}

TEST_CASE("PngSuite exif2c08.png carries an EXIF block the probe finds", "[probe][pngsuite][exif]") {
  ProbeOutcome p = probe_file("/usr/share/libjxl-testdata/external/pngsuite/exif2c08.png");
  CHECK(p.defect == Defect::none);
  CHECK(p.info.has_exif);
  CHECK_FALSE(p.info.has_gps);
}

// Truth constructed by the test: images encoded by OpenCV's writers (libpng,
// libjpeg-turbo, libtiff, libwebp and OpenCV's own BMP/PNM code) with known size,
// layout and depth.
TEST_CASE("probe reads what the writers were told to write", "[probe]") {
  struct Case {
    std::string ext;
    int type;
    std::vector<int> params;
    Format format;
    ColorMode mode;
    int depth;
    bool interlaced;
  };
  const std::vector<Case> cases{
      {".png", CV_8UC1, {}, Format::png, ColorMode::gray, 8, false},
      {".png", CV_8UC3, {}, Format::png, ColorMode::rgb, 8, false},
      {".png", CV_8UC4, {}, Format::png, ColorMode::rgba, 8, false},
      {".png", CV_16UC1, {}, Format::png, ColorMode::gray, 16, false},
      {".png", CV_16UC3, {}, Format::png, ColorMode::rgb, 16, false},
      {".jpg", CV_8UC3, {}, Format::jpeg, ColorMode::rgb, 8, false},
      {".jpg", CV_8UC1, {}, Format::jpeg, ColorMode::gray, 8, false},
      {".jpg", CV_8UC3, {cv::IMWRITE_JPEG_PROGRESSIVE, 1}, Format::jpeg, ColorMode::rgb, 8, true},
      {".bmp", CV_8UC3, {}, Format::bmp, ColorMode::rgb, 8, false},
      {".bmp", CV_8UC1, {}, Format::bmp, ColorMode::palette, 8, false},
      {".tif", CV_8UC3, {}, Format::tiff, ColorMode::rgb, 8, false},
      {".tif", CV_8UC1, {}, Format::tiff, ColorMode::gray, 8, false},
      {".tif", CV_16UC1, {}, Format::tiff, ColorMode::gray, 16, false},
      {".webp", CV_8UC3, {cv::IMWRITE_WEBP_QUALITY, 80}, Format::webp, ColorMode::rgb, 8, false},
      {".webp", CV_8UC3, {cv::IMWRITE_WEBP_QUALITY, 101}, Format::webp, ColorMode::rgb, 8, false},
      {".pgm", CV_8UC1, {}, Format::pnm, ColorMode::gray, 8, false},
      {".pgm", CV_16UC1, {}, Format::pnm, ColorMode::gray, 16, false},
      {".ppm", CV_8UC3, {}, Format::pnm, ColorMode::rgb, 8, false},
      {".pbm", CV_8UC1, {}, Format::pnm, ColorMode::gray, 1, false},
  };
  for (const auto& c : cases) {
    INFO(c.ext << " type " << c.type);
    auto bytes = encode(gradient(37, 23, c.type), c.ext, c.params);
    ProbeOutcome p = probe_bytes(bytes);
    CHECK(p.defect == Defect::none);
    CHECK(p.info.format == c.format);
    CHECK(p.info.width == 37);
    CHECK(p.info.height == 23);
    CHECK(p.info.mode == c.mode);
    CHECK(int(p.info.bit_depth) == c.depth);
    CHECK(p.info.interlaced == c.interlaced);
    CHECK(p.info.frames == 1);
  }
}

TEST_CASE("probe survives every prefix and random garbage", "[probe][fault]") {
  std::vector<std::vector<uint8_t>> seeds{
      encode(gradient(20, 10, CV_8UC3), ".png"), encode(gradient(20, 10, CV_8UC3), ".jpg"),
      encode(gradient(20, 10, CV_8UC3), ".bmp"), encode(gradient(20, 10, CV_8UC3), ".tif"),
      encode(gradient(20, 10, CV_8UC3), ".webp"), encode(gradient(20, 10, CV_8UC3), ".ppm")};
  for (const auto& s : seeds) {
    // Every strict prefix is damaged: it must never read as a good image.
    for (size_t n = 0; n < s.size(); ++n) {
      std::vector<uint8_t> cut(s.begin(), s.begin() + static_cast<long>(n));
      ProbeOutcome p = probe_bytes(cut);
      INFO("prefix " << n << " of " << s.size() << " format " << to_string(p.info.format));
      if (p.info.format == Format::webp || p.info.format == Format::jpeg || p.info.format == Format::png ||
          p.info.format == Format::tiff || p.info.format == Format::bmp || p.info.format == Format::pnm) {
        CHECK(p.defect != Defect::none);
      }
    }
  }
  cv::RNG rng(7);
  for (int i = 0; i < 2000; ++i) {
    std::vector<uint8_t> junk(static_cast<size_t>(rng.uniform(0, 200)));
    for (auto& b : junk) b = static_cast<uint8_t>(rng.uniform(0, 256));
    if (i % 4 == 0 && junk.size() > 8) std::memcpy(junk.data(), "\x89PNG\r\n\x1a\n", 8);
    if (i % 4 == 1 && junk.size() > 3) std::memcpy(junk.data(), "\xFF\xD8\xFF", 3);
    if (i % 4 == 2 && junk.size() > 4) std::memcpy(junk.data(), "II*\0", 4);
    (void)probe_bytes(junk);  // must not crash or read out of bounds (run under ASan in DEVELOPERS.md)
  }
}

TEST_CASE("format comes from the bytes, not the extension", "[probe]") {
  auto png = encode(gradient(8, 8, CV_8UC3), ".png");
  CHECK(probe_bytes(png).info.format == Format::png);
  CHECK(format_from_extension("a/b/photo.JPG") == Format::jpeg);
  CHECK(format_from_extension("a/b.png/photo") == Format::unknown);
  CHECK(format_from_extension(".png") == Format::unknown);
  CHECK(has_other_image_extension("x/y.HEIC"));
}

TEST_CASE("probe reads the IJG quality a JPEG was written at", "[probe][jpeg]") {
  // Reference: ITU-T T.81 Annex K, Table K.1 (the example luminance table, which
  // the IJG library writes unscaled at quality 50), and libjpeg-turbo through
  // OpenCV's imwrite, told each quality: the probe must read back the quality it
  // was told (tables that differ between qualities; at the top some qualities
  // give the same table, and the probe names the highest).
  const int k1[8] = {16, 11, 10, 16, 24, 40, 51, 61};  // Table K.1, first row
  for (int k = 0; k < 8; ++k) CHECK(ijg_luma_step(50, k) == k1[k]);
  CHECK(ijg_luma_step(100, 63) == 1);
  cv::Mat m(28, 28, CV_8UC1);
  cv::randu(m, 0, 255);
  for (int q = 5; q <= 100; q += 5) {
    std::vector<uchar> buf;
    cv::imencode(".jpg", m, buf, {cv::IMWRITE_JPEG_QUALITY, q});
    const ProbeOutcome p = probe_bytes(std::span<const uint8_t>(buf.data(), buf.size()));
    INFO("quality " << q);
    CHECK(p.info.format == Format::jpeg);
    CHECK(int(p.info.jpeg_quality) == q);
  }
  // Not a JPEG: no quality.
  std::vector<uchar> png;
  cv::imencode(".png", m, png);
  CHECK(probe_bytes(std::span<const uint8_t>(png.data(), png.size())).info.jpeg_quality == 0);
}
