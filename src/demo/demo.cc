#include "tamis/demo/demo.h"

#include <algorithm>
#include <fstream>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "tamis/base/random.h"
#include "tamis/read/decode/codecs.h"

namespace tamis {

namespace {

// The three draws are sequenced (function arguments are evaluated in an
// unspecified order: clang went left to right and made another demo), in the
// order that made the committed demo_data: red, green, then blue.
cv::Scalar colour(SplitMix64& rng) {
  const double r = double(40 + rng.below(200));
  const double g = double(40 + rng.below(200));
  const double b = double(40 + rng.below(200));
  return cv::Scalar(b, g, r);
}

// Adds fine weave noise and a little blur so swatches look photographed, not drawn.
void weave_texture(cv::Mat& img, SplitMix64& rng) {
  cv::Mat noise(img.size(), CV_8UC3);
  for (int y = 0; y < noise.rows; ++y)
    for (int x = 0; x < noise.cols; ++x) {
      uint8_t n = static_cast<uint8_t>(rng.below(24));
      noise.at<cv::Vec3b>(y, x) = cv::Vec3b(n, n, n);
    }
  cv::subtract(img, noise, img);
  cv::GaussianBlur(img, img, cv::Size(3, 3), 0.8);
}

cv::Mat gingham(SplitMix64& rng, cv::Size size) {
  cv::Mat img(size, CV_8UC3, cv::Scalar(245, 245, 240));
  cv::Scalar c = colour(rng);
  int band = 8 + static_cast<int>(rng.below(10));
  cv::Mat layer = img.clone();
  for (int x = 0; x < size.width; x += band * 2) cv::rectangle(layer, {x, 0, band, size.height}, c, cv::FILLED);
  cv::addWeighted(img, 0.5, layer, 0.5, 0, img);
  layer = img.clone();
  for (int y = 0; y < size.height; y += band * 2) cv::rectangle(layer, {0, y, size.width, band}, c, cv::FILLED);
  cv::addWeighted(img, 0.5, layer, 0.5, 0, img);
  return img;
}

cv::Mat pinstripe(SplitMix64& rng, cv::Size size) {
  cv::Mat img(size, CV_8UC3, colour(rng) * 0.4);
  cv::Scalar line = cv::Scalar(230, 230, 225);
  int gap = 6 + static_cast<int>(rng.below(8));
  for (int x = static_cast<int>(rng.below(gap)); x < size.width; x += gap)
    cv::line(img, {x, 0}, {x, size.height - 1}, line, 1);
  return img;
}

cv::Mat polka(SplitMix64& rng, cv::Size size) {
  cv::Mat img(size, CV_8UC3, colour(rng));
  cv::Scalar dot = colour(rng);
  int step = 14 + static_cast<int>(rng.below(10));
  int r = 3 + static_cast<int>(rng.below(4));
  for (int y = step / 2; y < size.height; y += step)
    for (int x = (y / step % 2) * step / 2 + step / 2; x < size.width; x += step)
      cv::circle(img, {x + int(rng.below(3)), y + int(rng.below(3))}, r, dot, cv::FILLED, cv::LINE_AA);
  return img;
}

cv::Mat herringbone(SplitMix64& rng, cv::Size size) {
  cv::Mat img(size, CV_8UC3, colour(rng) * 0.5);
  cv::Scalar c = colour(rng);
  int w = 10 + static_cast<int>(rng.below(6));
  for (int x0 = 0; x0 < size.width; x0 += w)
    for (int y = -w; y < size.height; y += 4) {
      bool up = (x0 / w) % 2 == 0;
      cv::line(img, {x0, y + (up ? w : 0)}, {x0 + w, y + (up ? 0 : w)}, c, 1, cv::LINE_AA);
    }
  return img;
}

// One file of the demo: its path below the demo's folder and its bytes.
struct DemoFile {
  std::filesystem::path rel;
  std::string bytes;
};

void save(std::vector<DemoFile>& files, const std::filesystem::path& rel, const cv::Mat& img, const std::vector<int>& params) {
  std::vector<uint8_t> bytes;
  if (!opencv_imencode(rel.extension().string(), img, bytes, params)) throw std::runtime_error("cannot encode " + rel.string());
  files.push_back({rel, std::string(bytes.begin(), bytes.end())});
}

void save_text(std::vector<DemoFile>& files, const std::filesystem::path& rel, std::string text) {
  files.push_back({rel, std::move(text)});
}

// Refuses (DemoTargetError) a `dir` that is not a folder, or that holds anything
// but files of the demo: a demo tamis wrote may be written again, nothing else
// is overwritten or mixed in.
void check_target(const std::filesystem::path& dir, const std::vector<DemoFile>& files) {
  namespace fs = std::filesystem;
  std::error_code ec;
  const fs::file_status st = fs::symlink_status(dir, ec);
  if (ec || !fs::exists(st)) return;  // a new folder
  if (!fs::is_directory(st)) throw DemoTargetError(dir.string() + " exists and is not a folder");
  std::set<fs::path> ours;
  for (const DemoFile& f : files)
    for (fs::path p = f.rel; !p.empty(); p = p.parent_path()) ours.insert(p);
  for (fs::recursive_directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
    const fs::path rel = it->path().lexically_relative(dir);
    const bool folder = it->is_directory(ec) && !it->is_symlink(ec);
    const bool known = ours.count(rel) > 0 &&
                       (folder ? std::none_of(files.begin(), files.end(), [&](const DemoFile& f) { return f.rel == rel; })
                               : it->is_regular_file(ec) && !it->is_symlink(ec));
    if (!known)
      throw DemoTargetError(dir.string() + " is not empty and is not a demo tamis wrote (it holds " + rel.string() +
                            "); choose a new or empty folder");
  }
  if (ec) throw DemoTargetError("cannot look into " + dir.string() + ": " + ec.message());
}

}  // namespace

size_t write_demo(const std::filesystem::path& dir) {
  namespace fs = std::filesystem;
  SplitMix64 rng(20261202);
  std::vector<DemoFile> files;
  const std::vector<int> jpeg{cv::IMWRITE_JPEG_QUALITY, 88};
  const std::vector<int> png{cv::IMWRITE_PNG_COMPRESSION, 9};
  auto name = [](int i, const char* ext) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "swatch_%03d.%s", i, ext);
    return std::string(buf);
  };
  const cv::Size size(128, 96);
  cv::Mat first_gingham, first_polka;
  for (int i = 1; i <= 14; ++i) {
    cv::Mat img = gingham(rng, size);
    weave_texture(img, rng);
    if (i == 1) first_gingham = img;
    save(files, fs::path("gingham") / name(i, "jpg"), img, jpeg);
  }
  for (int i = 1; i <= 12; ++i) {
    cv::Mat img = pinstripe(rng, size);
    weave_texture(img, rng);
    save(files, fs::path("pinstripe") / name(i, "png"), img, png);
  }
  for (int i = 1; i <= 12; ++i) {
    cv::Mat img = polka(rng, size);
    weave_texture(img, rng);
    if (i == 1) first_polka = img;
    save(files, fs::path("polka_dots") / name(i, "jpg"), img, jpeg);
  }
  for (int i = 1; i <= 3; ++i) {  // a second spelling of the same class
    cv::Mat img = polka(rng, size);
    weave_texture(img, rng);
    save(files, fs::path("polka-dots") / name(i, "jpg"), img, jpeg);
  }
  for (int i = 1; i <= 3; ++i) {  // a class far smaller than the others
    cv::Mat img = herringbone(rng, cv::Size(96, 96));
    weave_texture(img, rng);
    save(files, fs::path("herringbone") / name(i, "png"), img, png);
  }
  // A byte-identical copy of a gingham swatch filed under pinstripe.
  save_text(files, fs::path("pinstripe") / "swatch_099.jpg", files.front().bytes);
  // A mirrored, re-encoded copy of a polka swatch in the same class.
  cv::Mat mirrored;
  cv::flip(first_polka, mirrored, 1);
  save(files, fs::path("polka_dots") / name(98, "jpg"), mirrored, std::vector<int>{cv::IMWRITE_JPEG_QUALITY, 70});
  // A truncated JPEG: the upload stopped halfway.
  {
    std::vector<uint8_t> bytes;
    opencv_imencode(".jpg", first_gingham, bytes, jpeg);
    bytes.resize(bytes.size() / 2);
    save_text(files, fs::path("gingham") / name(97, "jpg"), std::string(bytes.begin(), bytes.end()));
  }
  save_text(files, "README.txt", "Fabric swatches photographed at the weaving studio, one folder per pattern.\n");
  save_text(files, fs::path("gingham") / ".thumbs.db", "cache of a file browser\n");
  check_target(dir, files);
  for (const DemoFile& f : files) {
    const fs::path p = dir / f.rel;
    fs::create_directories(p.parent_path());
    std::ofstream os(p, std::ios::binary | std::ios::trunc);
    os.write(f.bytes.data(), static_cast<std::streamsize>(f.bytes.size()));
    if (!os) throw std::runtime_error("cannot write " + p.string());
  }
  return files.size();
}

}  // namespace tamis
