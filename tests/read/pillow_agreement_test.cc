// The probe and the decoders against Pillow (Debian python3-pil), an independent
// image library: tests/fixtures/pillow_images.py writes the files and records what
// they hold; the ctest fixture `pillow_images` writes them into $TAMIS_TEST_DATA/pillow.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <functional>

#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/temp_tree.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/features.h"
#include "tamis/read/probe.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {
fs::path pillow_dir() {
  std::string root = test::env_or_empty("TAMIS_TEST_DATA");
  REQUIRE_FALSE(root.empty());  // set by ctest; the fixture must have produced the files
  fs::path d = fs::path(root) / "pillow";
  REQUIRE(fs::exists(d / "expectations.json"));
  return d;
}
Format format_of(const std::string& name) {
  if (name.rfind("png", 0) == 0) return Format::png;
  if (name.rfind("jpeg", 0) == 0) return Format::jpeg;
  if (name.rfind("gif", 0) == 0) return Format::gif;
  if (name.rfind("bmp", 0) == 0) return Format::bmp;
  if (name.rfind("tiff", 0) == 0) return Format::tiff;
  if (name.rfind("webp", 0) == 0) return Format::webp;
  return Format::pnm;
}
}  // namespace

TEST_CASE("probe agrees with Pillow on size, layout, depth, frames and EXIF", "[probe][pillow]") {
  fs::path dir = pillow_dir();
  nlohmann::json expect;
  std::ifstream(dir / "expectations.json") >> expect;
  REQUIRE(expect.size() >= 30);
  for (const auto& [name, e] : expect.items()) {
    INFO(name);
    auto bytes = test::read_bytes(dir / name);
    ProbeOutcome p = probe_bytes(bytes);
    CHECK(p.defect == Defect::none);
    CHECK(p.info.format == format_of(name));
    CHECK(p.info.width == e["width"].get<uint32_t>());
    CHECK(p.info.height == e["height"].get<uint32_t>());
    CHECK(std::string(to_string(p.info.mode)) == e["mode"].get<std::string>());
    if (e.contains("bits")) CHECK(int(p.info.bit_depth) == e["bits"].get<int>());
    CHECK(p.info.frames == e["frames"].get<uint32_t>());
    CHECK(p.info.orientation == e.value("orientation", p.info.has_exif ? p.info.orientation : 0));
    CHECK(p.info.has_gps == e.value("gps", false));
    Decoded d = decode_image(bytes, p.info, DecodeLimits{});
    if (e.value("decodable", true)) {
      CHECK(d.defect == Defect::none);
      CHECK_FALSE(d.reduced.empty());
    } else {
      CHECK(d.defect == Defect::no_decoder);
    }
  }
}

TEST_CASE("tamis's GIF decoder gives Pillow's pixels exactly", "[decode][gif][pillow]") {
  fs::path dir = pillow_dir();
  for (const char* name : {"gif_static.gif", "gif_interlaced.gif", "gif_animated.gif"}) {
    INFO(name);
    auto bytes = test::read_bytes(dir / name);
    Defect defect = Defect::none;
    cv::Mat ours = decode_gif_first_frame(bytes, defect);
    REQUIRE(defect == Defect::none);
    cv::Mat ref = cv::imread((dir / (std::string(name) + ".ref.ppm")).string(), cv::IMREAD_COLOR);
    REQUIRE(!ref.empty());
    REQUIRE(ours.size() == ref.size());
    CHECK(cv::norm(ours, ref, cv::NORM_INF) == 0);
  }
}

// Decodes each Pillow fixture whose expectation names a reference file under
// `key`, and hands it with the reference's path to `check`; returns how many.
int for_each_reference(const char* key, const std::function<void(const Decoded&, const std::string&)>& check) {
  fs::path dir = pillow_dir();
  nlohmann::json expect;
  std::ifstream(dir / "expectations.json") >> expect;
  int checked = 0;
  for (const auto& [name, e] : expect.items()) {
    if (!e.contains(key)) continue;
    INFO(name);
    auto bytes = test::read_bytes(dir / name);
    ProbeOutcome p = probe_bytes(bytes);
    REQUIRE(p.defect == Defect::none);
    Decoded d = decode_image(bytes, p.info, DecodeLimits{});
    REQUIRE(d.defect == Defect::none);
    check(d, (dir / e[key].get<std::string>()).string());
    ++checked;
  }
  return checked;
}

// Pillow's Image.alpha_composite over white (over black for the white drawing,
// which white would hide) is the reference for how an image with alpha is seen.
// The files are small, so the reduced image is the whole picture. Rounding may
// differ by one level (premultiplied colour rounded first here).
TEST_CASE("images with alpha are judged as Pillow lays them over a plain ground", "[decode][alpha][pillow]") {
  const int checked = for_each_reference("flat", [](const Decoded& d, const std::string& reference) {
    CHECK(d.alpha_min < 255);
    cv::Mat ref = cv::imread(reference, cv::IMREAD_COLOR);
    REQUIRE(!ref.empty());
    REQUIRE(d.reduced.size() == ref.size());
    cv::Mat ours = d.reduced;
    if (ours.channels() == 1) cv::cvtColor(ours, ours, cv::COLOR_GRAY2BGR);
    REQUIRE(ours.channels() == 3);
    CHECK(cv::norm(ours, ref, cv::NORM_INF) <= 1);
  });
  CHECK(checked == 7);
}

// 16-bit samples that use fewer bits are taken to 8 bits against 65535, as the
// PNG specification and the loaders (Pillow, OpenCV, TensorFlow) take them: a
// 12-bit camera's picture is dark, 8-bit values in a 16-bit TIFF a black one,
// which is what a model would be trained on. The fixture computes the reference
// with numpy. (From 2026-12-03 to 12-04 tamis read them against the top of the
// bits they use, which brightened dark 16-bit photographs whose samples stay
// under 32768, such as libjxl-testdata's linear-light PNGs, by up to 132 levels.)
TEST_CASE("16-bit samples of fewer bits are read against 65535, as loaders read them", "[decode][deep][pillow]") {
  const int checked = for_each_reference("deep", [](const Decoded& d, const std::string& reference) {
    cv::Mat ref = cv::imread(reference, cv::IMREAD_GRAYSCALE);
    REQUIRE(!ref.empty());
    REQUIRE(d.reduced.size() == ref.size());
    REQUIRE(d.reduced.channels() == 1);
    CHECK(cv::norm(d.reduced, ref, cv::NORM_INF) <= 1);
  });
  CHECK(checked == 2);
}

TEST_CASE("a drawing seen only through its alpha is not a blank picture", "[decode][alpha]") {
  // Two different shapes, both stored as black pixels whose alpha draws them (as
  // icon themes store their symbolic icons): laid over white they are a black
  // disc and a black bar, whose thumbnails differ; before, both were flat black.
  auto shape = [](bool disc) {
    cv::Mat m(48, 48, CV_8UC4, cv::Scalar(0, 0, 0, 0));
    if (disc) cv::circle(m, {24, 24}, 15, cv::Scalar(0, 0, 0, 255), cv::FILLED, cv::LINE_AA);
    else cv::rectangle(m, cv::Rect(8, 20, 32, 8), cv::Scalar(0, 0, 0, 255), cv::FILLED);
    std::vector<uint8_t> png;
    cv::imencode(".png", m, png);
    return png;
  };
  auto features = [](const std::vector<uint8_t>& png) {
    ProbeOutcome p = probe_bytes(png);
    REQUIRE(p.defect == Defect::none);
    Decoded d = decode_image(png, p.info, DecodeLimits{});
    REQUIRE(d.defect == Defect::none);
    return lookalike_features(d.reduced);
  };
  const Lookalike disc = features(shape(true)), bar = features(shape(false));
  CHECK(thumb_sd(thumb_stats(disc.thumb)) > 40);
  CHECK(thumb_sd(thumb_stats(bar.thumb)) > 40);
  CHECK(thumb_correlation(disc.thumb, 0, bar.thumb) < 0.9);
}

TEST_CASE("GIF decoder reports damaged LZW data instead of inventing pixels", "[decode][gif][fault]") {
  fs::path dir = pillow_dir();
  auto good = test::read_bytes(dir / "gif_static.gif");
  ProbeOutcome p = probe_bytes(good);
  REQUIRE(p.defect == Defect::none);
  // Cut inside the image data: the probe sees the missing trailer.
  std::vector<uint8_t> cut(good.begin(), good.begin() + static_cast<long>(good.size() * 2 / 3));
  CHECK(probe_bytes(cut).defect == Defect::truncated);
  Defect d = Defect::none;
  CHECK(decode_gif_first_frame(cut, d).empty());
  CHECK(d != Defect::none);
}
