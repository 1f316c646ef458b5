#include "tamis/demo/demo.h"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <map>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>
#include <turbojpeg.h>

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

// Light across the table: brightness falling off in a random direction, as a
// studio lamp leaves it (every photograph gets its own, so that no two
// swatches of one pattern are the same picture).
void studio_light(cv::Mat& img, SplitMix64& rng) {
  const double angle = double(rng.below(360)) * CV_PI / 180.0;
  const double depth = 0.15 + double(rng.below(20)) / 100.0;  // 0.15-0.34 darker across the frame
  const double cx = std::cos(angle), cy = std::sin(angle);
  const double half = 0.5 * (std::abs(cx) * img.cols + std::abs(cy) * img.rows);
  for (int y = 0; y < img.rows; ++y)
    for (int x = 0; x < img.cols; ++x) {
      const double along = ((x - img.cols / 2.0) * cx + (y - img.rows / 2.0) * cy) / half;  // -1..1
      const double gain = 1.0 - depth * 0.5 * (1.0 + along);
      cv::Vec3b& p = img.at<cv::Vec3b>(y, x);
      for (int k = 0; k < 3; ++k) p[k] = cv::saturate_cast<uint8_t>(p[k] * gain);
    }
}

// Adds the lamp's fall-off, fine weave noise and a little blur so swatches look
// photographed, not drawn.
void weave_texture(cv::Mat& img, SplitMix64& rng) {
  studio_light(img, rng);
  cv::Mat noise(img.size(), CV_8UC3);
  for (int y = 0; y < noise.rows; ++y)
    for (int x = 0; x < noise.cols; ++x) {
      uint8_t n = static_cast<uint8_t>(rng.below(10));
      noise.at<cv::Vec3b>(y, x) = cv::Vec3b(n, n, n);
    }
  cv::subtract(img, noise, img);
  cv::GaussianBlur(img, img, cv::Size(3, 3), 0.8);
}

cv::Mat gingham(SplitMix64& rng, cv::Size size) {
  cv::Mat img(size, CV_8UC3, cv::Scalar(245, 245, 240));
  cv::Scalar c = colour(rng);
  int band = 8 + static_cast<int>(rng.below(10));
  // Where the checks start, taken from the dye (no draw of its own, so that the
  // other swatches keep their pixels): two dyes of one weave are two fabrics,
  // not one picture recoloured, and are cut at different places.
  const int period = band * 2;
  const int px = static_cast<int>(c[0] + 3 * c[1]) % period, py = static_cast<int>(c[2] + 5 * c[1]) % period;
  cv::Mat layer = img.clone();
  for (int x = px - period; x < size.width; x += period) cv::rectangle(layer, {x, 0, band, size.height}, c, cv::FILLED);
  cv::addWeighted(img, 0.5, layer, 0.5, 0, img);
  layer = img.clone();
  for (int y = py - period; y < size.height; y += period) cv::rectangle(layer, {0, y, size.width, band}, c, cv::FILLED);
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
  const cv::Scalar ground = colour(rng);
  cv::Mat img(size, CV_8UC3, ground);
  const cv::Scalar dot = (ground[0] + ground[1] + ground[2] > 3 * 140) ? ground * 0.3 : ground * 0.3 + cv::Scalar(160, 160, 160);
  int step = 18 + static_cast<int>(rng.below(14));
  int r = 4 + static_cast<int>(rng.below(5));
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

// Broken checks: an 8x8 tile of checks with a tooth on each off square.
cv::Mat houndstooth(SplitMix64& rng, cv::Size size) {
  const cv::Scalar ink = colour(rng) * 0.35;
  const cv::Vec3b dark(cv::saturate_cast<uint8_t>(ink[0]), cv::saturate_cast<uint8_t>(ink[1]), cv::saturate_cast<uint8_t>(ink[2]));
  cv::Mat img(size, CV_8UC3, cv::Scalar(232, 230, 226));
  const int unit = 4 + static_cast<int>(rng.below(4));  // pixels a tile unit
  const int dx = static_cast<int>(rng.below(64)), dy = static_cast<int>(rng.below(64));
  for (int y = 0; y < size.height; ++y)
    for (int x = 0; x < size.width; ++x) {
      const int i = (y + dy) / unit % 8, j = (x + dx) / unit % 8;
      const bool check = (i < 4) == (j < 4);
      const bool tooth = (i < 4 && j >= 4 && (j - 4) + (3 - i) < 3) || (i >= 4 && j < 4 && (3 - j) + (i - 4) < 3);
      if (check || tooth) img.at<cv::Vec3b>(y, x) = dark;
    }
  return img;
}

cv::Mat tartan(SplitMix64& rng, cv::Size size) {
  cv::Mat img(size, CV_8UC3, colour(rng) * 0.6);
  for (int pass = 0; pass < 2; ++pass) {  // warp, then weft
    cv::Mat layer = img.clone();
    const int period = 40 + static_cast<int>(rng.below(30));
    const int stripes = 2 + static_cast<int>(rng.below(3));
    for (int k = 0; k < stripes; ++k) {
      const cv::Scalar c = colour(rng);
      const int at = static_cast<int>(rng.below(static_cast<uint64_t>(period)));
      const int width = 2 + static_cast<int>(rng.below(9));
      for (int o = at; o < (pass ? size.height : size.width); o += period)
        cv::rectangle(layer, pass ? cv::Rect(0, o, size.width, width) : cv::Rect(o, 0, width, size.height), c, cv::FILLED);
    }
    cv::addWeighted(img, 0.5, layer, 0.5, 0, img);
  }
  return img;
}

// A pulled thread: a pale streak across the cloth, and its mask (255 on the
// flaw, 0 elsewhere), as an inspection set would keep them.
void pulled_thread(cv::Mat& img, cv::Mat& mask, SplitMix64& rng) {
  mask = cv::Mat(img.size(), CV_8UC1, cv::Scalar(0));
  const cv::Point a(static_cast<int>(rng.below(static_cast<uint64_t>(img.cols))), 0);
  const cv::Point b(static_cast<int>(rng.below(static_cast<uint64_t>(img.cols))), img.rows - 1);
  const int width = 3 + static_cast<int>(rng.below(5));
  cv::line(mask, a, b, cv::Scalar(255), width);
  cv::Mat pale = img.clone();
  pale.setTo(cv::Scalar(240, 240, 240), mask);
  cv::addWeighted(img, 0.35, pale, 0.65, 0, img);
}

// JPEG bytes with an EXIF block (APP1, after the JFIF APP0) holding `tiff`, a
// big-endian TIFF structure (EXIF 2.32 / TIFF 6.0 layout) built by the caller.
std::string with_exif(const std::vector<uint8_t>& jpeg, const std::string& tiff) {
  std::string app1 = "\xFF\xE1";
  const size_t length = 2 + 6 + tiff.size();
  app1 += static_cast<char>(length >> 8);
  app1 += static_cast<char>(length & 0xFF);
  app1 += std::string("Exif\0\0", 6) + tiff;
  // After SOI and, when there is one, the APP0 segment.
  size_t at = 2;
  if (jpeg.size() > 6 && jpeg[2] == 0xFF && jpeg[3] == 0xE0) at = 4 + (size_t{jpeg[4]} << 8 | jpeg[5]);
  std::string out(jpeg.begin(), jpeg.begin() + static_cast<std::ptrdiff_t>(at));
  return out + app1 + std::string(jpeg.begin() + static_cast<std::ptrdiff_t>(at), jpeg.end());
}

void put16(std::string& s, unsigned v) {
  s += static_cast<char>(v >> 8 & 0xFF);
  s += static_cast<char>(v & 0xFF);
}
void put32(std::string& s, uint32_t v) {
  put16(s, v >> 16);
  put16(s, v & 0xFFFF);
}
// One 12-byte IFD entry: tag, type, count, value or offset.
void entry(std::string& s, unsigned tag, unsigned type, uint32_t count, uint32_t value) {
  put16(s, tag);
  put16(s, type);
  put32(s, count);
  put32(s, value);
}

// IFD0 with Orientation (0x0112, SHORT) = `orientation`.
std::string tiff_orientation(unsigned orientation) {
  std::string t = "MM";
  put16(t, 42);
  put32(t, 8);
  put16(t, 1);
  entry(t, 0x0112, 3, 1, orientation << 16);  // a SHORT sits in the value's first two bytes
  put32(t, 0);
  return t;
}

// IFD0 pointing (0x8825) to a GPS IFD with latitude and longitude (tags 1-4):
// the position of a made-up studio, in the sea off a made-up coast.
std::string tiff_gps() {
  std::string t = "MM";
  put16(t, 42);
  put32(t, 8);
  put16(t, 1);
  entry(t, 0x8825, 4, 1, 26);  // the GPS IFD follows IFD0 (8 + 2 + 12 + 4)
  put32(t, 0);
  put16(t, 4);
  const uint32_t data = 26 + 2 + 4 * 12 + 4;
  entry(t, 0x0001, 2, 2, uint32_t{'N'} << 24);
  entry(t, 0x0002, 5, 3, data);
  entry(t, 0x0003, 2, 2, uint32_t{'W'} << 24);
  entry(t, 0x0004, 5, 3, data + 24);
  put32(t, 0);
  for (uint32_t v : {12u, 1u, 30u, 1u, 0u, 1u, 24u, 1u, 45u, 1u, 0u, 1u}) put32(t, v);  // 12 deg 30', 24 deg 45'
  return t;
}

// JPEG bytes in 4:1:1 sampling (chroma a quarter of the width, full height),
// written by libjpeg-turbo: a valid layout that few encoders choose.
std::string jpeg_411(const cv::Mat& bgr, int quality) {
  tjhandle tj = tjInitCompress();
  if (!tj) throw std::runtime_error("cannot start the JPEG encoder");
  unsigned char* buf = nullptr;
  unsigned long size = 0;
  const int rc = tjCompress2(tj, bgr.data, bgr.cols, static_cast<int>(bgr.step), bgr.rows, TJPF_BGR, &buf, &size,
                             TJSAMP_411, quality, 0);
  std::string out = rc == 0 ? std::string(reinterpret_cast<const char*>(buf), size) : std::string();
  tjFree(buf);
  tjDestroy(tj);
  if (out.empty()) throw std::runtime_error("cannot encode a 4:1:1 JPEG");
  return out;
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
  SplitMix64 rng(20261204);
  std::vector<DemoFile> files;
  const std::vector<int> jpeg{cv::IMWRITE_JPEG_QUALITY, 85};
  const std::vector<int> png{cv::IMWRITE_PNG_COMPRESSION, 9};
  auto name = [](int i, const char* ext) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "swatch_%03d.%s", i, ext);
    return std::string(buf);
  };
  auto bytes_of = [&](const fs::path& rel) -> const std::string& {
    for (const DemoFile& f : files)
      if (f.rel == rel) return f.bytes;
    throw std::logic_error("demo: no file " + rel.string());
  };
  // Photographed at 256x224 (not below the common 224 px input side).
  const cv::Size size(256, 224);
  using Draw = cv::Mat (*)(SplitMix64&, cv::Size);
  auto photo = [&](Draw draw) {
    cv::Mat img = draw(rng, size);
    weave_texture(img, rng);
    return img;
  };
  std::map<std::string, cv::Mat> kept;  // sources of the planted copies and frames
  // The classes, one folder each: gingham is the large one (class-imbalance
  // against the four herringbone swatches); polka-dots is a second spelling of
  // polka_dots (label-variants) and, like herringbone, a small class.
  const struct {
    const char* label;
    Draw draw;
    int count;
  } classes[] = {{"gingham", gingham, 60}, {"pinstripe", pinstripe, 36}, {"polka_dots", polka, 36},
                 {"polka-dots", polka, 4}, {"houndstooth", houndstooth, 36}, {"herringbone", herringbone, 4}};
  for (const auto& c : classes)
    for (int i = 1; i <= c.count; ++i) {
      cv::Mat img = photo(c.draw);
      if (i <= 3) kept[std::string(c.label) + std::to_string(i)] = img;
      save(files, fs::path(c.label) / name(i, "jpg"), img, jpeg);
    }
  // tartan: photographs of flawed cloth with their masks in a sibling folder
  // (tartan/images/ beside tartan/masks/, paired by name). Planted: a mask of
  // the wrong size (005), an empty mask (006), a mask with no photograph (031).
  for (int i = 1; i <= 30; ++i) {
    cv::Mat img = photo(tartan), mask;
    pulled_thread(img, mask, rng);
    save(files, fs::path("tartan") / "images" / name(i, "jpg"), img, jpeg);
    if (i == 5) cv::resize(mask, mask, size / 2, 0, 0, cv::INTER_NEAREST);
    if (i == 6) mask.setTo(cv::Scalar(0));
    save(files, fs::path("tartan") / "masks" / name(i, "png"), mask, png);
  }
  {
    cv::Mat img = photo(tartan), mask;
    pulled_thread(img, mask, rng);
    save(files, fs::path("tartan") / "masks" / name(31, "png"), mask, png);
  }
  // Copies. A byte copy within a class and one filed under another class
  // (label-conflict); a mirrored copy, a copy re-encoded as PNG and a lightly
  // blurred one (look-alikes).
  save_text(files, fs::path("houndstooth") / name(90, "jpg"), bytes_of(fs::path("houndstooth") / name(1, "jpg")));
  save_text(files, fs::path("pinstripe") / name(90, "jpg"), bytes_of(fs::path("gingham") / name(1, "jpg")));
  {
    cv::Mat mirrored;
    cv::flip(kept["polka_dots1"], mirrored, 1);
    save(files, fs::path("polka_dots") / name(90, "jpg"), mirrored, std::vector<int>{cv::IMWRITE_JPEG_QUALITY, 70});
    save(files, fs::path("houndstooth") / name(94, "png"), kept["houndstooth2"], png);
    cv::Mat soft;
    cv::GaussianBlur(kept["gingham2"], soft, cv::Size(0, 0), 1.0);
    save(files, fs::path("gingham") / name(90, "jpg"), soft, jpeg);
  }
  // Files that are not what they say: a truncated JPEG (the upload stopped
  // halfway) and a text file named like an image.
  {
    // (swatch 003 upside down, so that what is left of it copies no other file)
    std::vector<uint8_t> copy;
    cv::Mat again = kept["gingham3"].clone();
    cv::flip(again, again, 0);
    opencv_imencode(".jpg", again, copy, jpeg);
    save_text(files, fs::path("gingham") / name(91, "jpg"),
              std::string(copy.begin(), copy.begin() + static_cast<std::ptrdiff_t>(copy.size() / 2)));
  }
  save_text(files, fs::path("pinstripe") / name(92, "png"), "shot list for the pinstripe session: 36 swatches, north light\n");
  // Storage: a valid JPEG in 4:1:1 sampling (no finding: it is read), gray
  // stored as RGB, an alpha channel that is fully opaque, 16 bits a sample.
  files.push_back({fs::path("houndstooth") / name(91, "jpg"), jpeg_411(photo(houndstooth), 85)});
  {
    cv::Mat gray, as_rgb;
    cv::cvtColor(photo(gingham), gray, cv::COLOR_BGR2GRAY);
    cv::cvtColor(gray, as_rgb, cv::COLOR_GRAY2BGR);
    save(files, fs::path("gingham") / name(92, "jpg"), as_rgb, jpeg);
    // Drawn and lit, without the weave noise (which PNG would keep at great cost).
    auto lit = [&](Draw draw) {
      cv::Mat img = draw(rng, size);
      studio_light(img, rng);
      cv::GaussianBlur(img, img, cv::Size(3, 3), 0.8);
      return img;
    };
    cv::Mat bgra;
    cv::cvtColor(lit(pinstripe), bgra, cv::COLOR_BGR2BGRA);
    save(files, fs::path("pinstripe") / name(93, "png"), bgra, png);
    cv::Mat deep;
    lit(houndstooth).convertTo(deep, CV_16UC3, 257.0);
    save(files, fs::path("houndstooth") / name(92, "png"), deep, png);
  }
  // Frames a camera gets wrong: tiny, blank, dark, out of focus.
  {
    cv::Mat tiny;
    cv::resize(photo(polka), tiny, cv::Size(24, 21), 0, 0, cv::INTER_AREA);
    save(files, fs::path("polka_dots") / name(91, "jpg"), tiny, jpeg);
    save(files, fs::path("gingham") / name(93, "jpg"), cv::Mat(size, CV_8UC3, cv::Scalar(182, 186, 190)), jpeg);
    cv::Mat dark = photo(polka) * 0.12;
    save(files, fs::path("polka_dots") / name(93, "jpg"), dark, jpeg);
    cv::Mat soft;
    cv::GaussianBlur(photo(houndstooth), soft, cv::Size(0, 0), 5.0);
    save(files, fs::path("houndstooth") / name(95, "jpg"), soft, jpeg);
  }
  // EXIF: a photograph stored sideways with orientation 6 (turn 90 degrees
  // clockwise to view), and one that carries the studio's GPS position.
  {
    std::vector<uint8_t> b;
    cv::Mat turned;
    cv::rotate(photo(polka), turned, cv::ROTATE_90_COUNTERCLOCKWISE);
    opencv_imencode(".jpg", turned, b, jpeg);
    files.push_back({fs::path("polka_dots") / name(92, "jpg"), with_exif(b, tiff_orientation(6))});
    opencv_imencode(".jpg", photo(gingham), b, jpeg);
    files.push_back({fs::path("gingham") / name(94, "jpg"), with_exif(b, tiff_gps())});
  }
  save_text(files, "README.txt",
            "Fabric swatches photographed at the weaving studio, one folder per pattern; tartan holds\n"
            "inspection photographs of pulled threads with their masks. Written by `tamis demo`, with\n"
            "problems planted on purpose (README.md of tamis lists them).\n");
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
