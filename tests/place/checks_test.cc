// Image and label checks on generated files whose answers the test constructs,
// on Pillow-written files (EXIF orientation, animated GIF) and on the blurred
// series of Debian's visp-images-data.
#include <catch2/catch.hpp>

#include <filesystem>
#include <map>
#include <set>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/fashion_mnist.h"
#include "support/photos.h"
#include "support/temp_tree.h"
#include "tamis/base/random.h"
#include "tamis/pipeline/audit.h"
#include "tamis/place/baseline.h"
#include "tamis/place/checks.h"
#include "tamis/place/policy.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/features.h"
#include "tamis/read/probe.h"
#include "tamis/report/report_json.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {

std::vector<uint8_t> enc(const cv::Mat& m, const std::string& ext, std::vector<int> params = {}) {
  std::vector<uchar> b;
  REQUIRE(cv::imencode(ext, m, b, params));
  return std::vector<uint8_t>(b.begin(), b.end());
}

// A 240x240 crop of a colour photograph from visp-images-data (Klimt's "The Kiss";
// distinct offsets give distinct pictures).
cv::Mat photo_crop(int k) {
  static const cv::Mat klimt = cv::imread((test::kVispDir / "Klimt/Klimt.ppm").string());
  int x = (k * 67) % (klimt.cols - 240), y = (k * 41) % (klimt.rows - 240);
  return klimt(cv::Rect(x, y, 240, 240)).clone();
}

// EXIF APP1 segment (EXIF 2.32, CIPA DC-008) built by hand: IFD0 holds Orientation
// (tag 0x0112) and the GPS IFD pointer (0x8825); the GPS IFD holds GPSLatitudeRef
// (0x0001, ASCII "N") and GPSLatitude (0x0002, three RATIONALs). Little-endian TIFF.
std::vector<uint8_t> exif_app1_with_gps(uint16_t orientation) {
  std::vector<uint8_t> t;
  auto u16 = [&](uint16_t v) { t.push_back(uint8_t(v)); t.push_back(uint8_t(v >> 8)); };
  auto u32 = [&](uint32_t v) { for (int i = 0; i < 4; ++i) t.push_back(uint8_t(v >> (8 * i))); };
  t.insert(t.end(), {'I', 'I'});
  u16(42);
  u32(8);                     // IFD0 at offset 8
  u16(2);                     // two entries
  u16(0x0112); u16(3); u32(1); u16(orientation); u16(0);
  u16(0x8825); u16(4); u32(1); u32(8 + 2 + 2 * 12 + 4);  // GPS IFD right after IFD0
  u32(0);                     // no next IFD
  const uint32_t gps = static_cast<uint32_t>(t.size());
  u16(2);
  u16(0x0001); u16(2); u32(2); t.insert(t.end(), {'N', 0, 0, 0});
  u16(0x0002); u16(5); u32(3); u32(gps + 2 + 2 * 12 + 4);  // rationals after the GPS IFD
  u32(0);
  for (uint32_t v : {51u, 1u, 30u, 1u, 0u, 1u}) u32(v);
  std::vector<uint8_t> seg{0xFF, 0xE1};
  const uint16_t len = static_cast<uint16_t>(2 + 6 + t.size());
  seg.push_back(uint8_t(len >> 8));
  seg.push_back(uint8_t(len));
  seg.insert(seg.end(), {'E', 'x', 'i', 'f', 0, 0});
  seg.insert(seg.end(), t.begin(), t.end());
  return seg;
}

std::vector<uint8_t> jpeg_with_app1(const cv::Mat& m, const std::vector<uint8_t>& app1) {
  auto j = enc(m, ".jpg");
  j.insert(j.begin() + 2, app1.begin(), app1.end());  // right after SOI
  return j;
}

std::map<std::string, std::set<std::string>> codes_by_path(const AuditResult& r) {
  std::map<std::string, std::set<std::string>> out;
  for (const auto& f : r.findings)
    for (const auto& p : f.paths) out[p].insert(f.code);
  return out;
}

}  // namespace

TEST_CASE("each image check fires on the file built to trip it, and on no normal photo", "[checks]") {
  test::TempDir t;
  const fs::path cls = t / "studio";
  for (int k = 0; k < 14; ++k) test::write_bytes(cls / ("normal" + std::to_string(k) + ".jpg"), enc(photo_crop(k), ".jpg"));
  test::write_bytes(cls / "uniform.png", enc(cv::Mat(240, 240, CV_8UC3, cv::Scalar(128, 128, 128)), ".png"));
  test::write_bytes(cls / "black.png", enc(cv::Mat(240, 240, CV_8UC3, cv::Scalar(0, 0, 0)), ".png"));
  cv::Mat dark;
  photo_crop(20).convertTo(dark, -1, 0.08, 0);
  test::write_bytes(cls / "dark.jpg", enc(dark, ".jpg", {cv::IMWRITE_JPEG_QUALITY, 95}));
  cv::Mat blurred;
  cv::GaussianBlur(photo_crop(21), blurred, cv::Size(0, 0), 6.0);
  test::write_bytes(cls / "blurred.jpg", enc(blurred, ".jpg"));
  cv::Mat gray, gray3;
  cv::cvtColor(photo_crop(22), gray, cv::COLOR_BGR2GRAY);
  cv::cvtColor(gray, gray3, cv::COLOR_GRAY2BGR);
  test::write_bytes(cls / "gray_as_rgb.png", enc(gray3, ".png"));
  cv::Mat rgba;
  cv::cvtColor(photo_crop(23), rgba, cv::COLOR_BGR2BGRA);
  test::write_bytes(cls / "opaque_alpha.png", enc(rgba, ".png"));
  cv::Mat deep;
  photo_crop(24).convertTo(deep, CV_16UC3, 257.0);
  test::write_bytes(cls / "deep.png", enc(deep, ".png"));
  test::write_bytes(cls / "png_named.jpg", enc(photo_crop(25), ".png"));
  test::write_bytes(cls / "tiny.png", enc(photo_crop(26)(cv::Rect(0, 0, 20, 20)), ".png"));
  test::write_bytes(cls / "gps.jpg", jpeg_with_app1(photo_crop(27), exif_app1_with_gps(1)));
  // Files written by Pillow (tests/fixtures/pillow_images.py): EXIF orientation 6 and a 3-frame GIF.
  const fs::path pil = fs::path(test::env_or_empty("TAMIS_TEST_DATA")) / "pillow";
  REQUIRE(fs::exists(pil / "jpeg_orientation6.jpg"));
  fs::copy_file(pil / "jpeg_orientation6.jpg", cls / "turned.jpg");
  fs::copy_file(pil / "gif_animated.gif", cls / "animated.gif");

  AuditSettings s;
  s.root = t.path();
  AuditResult r = run_audit(s);
  REQUIRE(r.totals.unreadable == 0);
  auto codes = codes_by_path(r);
  auto has = [&](const std::string& file, const std::string& code) {
    INFO(file << " should carry " << code);
    CHECK(codes["studio/" + file].count(code) == 1);
  };
  has("uniform.png", "near-uniform");
  has("black.png", "near-uniform");
  has("dark.jpg", "underexposed");
  has("blurred.jpg", "unsharp");
  has("gray_as_rgb.png", "gray-as-rgb");
  has("opaque_alpha.png", "alpha-unused");
  has("deep.png", "deep-bit-depth");
  has("png_named.jpg", "extension-mismatch");
  has("tiny.png", "tiny-image");
  has("gps.jpg", "gps-location");
  has("turned.jpg", "exif-rotated");
  has("animated.gif", "multi-frame");
  has("animated.gif", "palette-image");
  // The normal photographs carry none of the quality or storage codes.
  const std::set<std::string> quality{"near-uniform", "underexposed", "overexposed", "low-entropy", "unsharp",
                                      "gray-as-rgb", "alpha-unused", "deep-bit-depth", "extension-mismatch",
                                      "tiny-image", "gps-location", "exif-rotated", "aspect-outlier"};
  for (int k = 0; k < 14; ++k)
    for (const auto& c : codes["studio/normal" + std::to_string(k) + ".jpg"]) {
      INFO("normal" << k << ".jpg carries " << c);
      CHECK(quality.count(c) == 0);
    }
  // The stored and displayed sizes of the turned file are both recorded.
  for (const auto& f : r.findings)
    if (f.code == "exif-rotated") {
      const auto& m = f.details.at("measurements").at(0).at("measure");
      CHECK(m.at("stored") == nlohmann::json::array({41, 29}));
      CHECK(m.at("displayed") == nlohmann::json::array({29, 41}));
    }
}

TEST_CASE("the hand-built EXIF GPS block is read as the layout prescribes", "[checks][exif]") {
  auto j = jpeg_with_app1(photo_crop(1), exif_app1_with_gps(6));
  ProbeOutcome p = probe_bytes(j);
  CHECK(p.defect == Defect::none);
  CHECK(p.info.has_exif);
  CHECK(p.info.orientation == 6);
  CHECK(p.info.has_gps);
}

TEST_CASE("whole classes of dark photos or line drawings are not flagged", "[checks]") {
  test::TempDir t;
  SplitMix64 rng(3);
  for (int k = 0; k < 12; ++k) {
    cv::Mat night;
    photo_crop(k).convertTo(night, -1, 0.09, 0);
    test::write_bytes(t / "night" / ("n" + std::to_string(k) + ".jpg"), enc(night, ".jpg", {cv::IMWRITE_JPEG_QUALITY, 95}));
    cv::Mat drawing(240, 240, CV_8UC1, cv::Scalar(255));
    for (int l = 0; l < 6; ++l)
      cv::line(drawing, {int(rng.below(240)), int(rng.below(240))}, {int(rng.below(240)), int(rng.below(240))},
               cv::Scalar(0), 2);
    test::write_bytes(t / "drawings" / ("d" + std::to_string(k) + ".png"), enc(drawing, ".png"));
  }
  AuditSettings s;
  s.root = t.path();
  AuditResult r = run_audit(s);
  for (const auto& f : r.findings) {
    INFO(f.code);
    CHECK(f.code != "underexposed");
    CHECK(f.code != "low-entropy");
    CHECK(f.code != "unsharp");
  }
}

// Source: visp-images-data's Gaussian-filter series (Klimt blurred at sigma 0.5, 2,
// 5, 7) and our own cv::GaussianBlur of Klimt.png: sharper must score higher.
TEST_CASE("the focus measure ranks a sharp image above its blurred copies", "[checks][focus]") {
  auto focus_of = [](const std::vector<uint8_t>& bytes) {
    ProbeOutcome p = probe_bytes(bytes);
    Decoded d = decode_image(bytes, p.info, DecodeLimits{});
    REQUIRE(d.defect == Defect::none);
    return image_stats(d.reduced, d.alpha_min).focus;
  };
  const fs::path dir = test::kVispDir / "Gaussian-filter";
  std::vector<float> visp{focus_of(test::read_bytes(test::kVispDir / "Klimt/Klimt.png"))};
  for (const char* sigma : {"0.5", "2.0", "5.0", "7.0"})
    visp.push_back(focus_of(test::read_bytes(dir / (std::string("Klimt_RGB_Gaussian_blur_sigma=") + sigma + ".png"))));
  for (size_t k = 1; k < visp.size(); ++k) CHECK(visp[k] < visp[k - 1]);
  cv::Mat klimt = cv::imread((test::kVispDir / "Klimt/Klimt.png").string());
  float last = focus_of(enc(klimt, ".png"));
  for (double sigma : {1.0, 2.0, 4.0, 8.0}) {
    cv::Mat b;
    cv::GaussianBlur(klimt, b, cv::Size(0, 0), sigma);
    float f = focus_of(enc(b, ".png"));
    CHECK(f < last);
    last = f;
  }
}

TEST_CASE("label hygiene: one class spelled three ways, near names, small and empty classes", "[checks][labels]") {
  test::TempDir t;
  int k = 0;
  auto add = [&](const std::string& cls, int n) {
    for (int i = 0; i < n; ++i, ++k) test::write_bytes(t / cls / ("p" + std::to_string(k) + ".jpg"), enc(photo_crop(k), ".jpg"));
  };
  add("Red_Pepper", 12);
  add("red pepper", 12);
  add("red-peppers", 12);
  add("cucumber", 12);
  add("cucumbar", 3);
  fs::create_directories(t / "zucchini");
  test::write_text(t / "zucchini" / "notes.txt", "none yet");
  AuditSettings s;
  s.root = t.path();
  AuditResult r = run_audit(s);
  std::map<std::string, std::vector<const Finding*>> by;
  for (const auto& f : r.findings) by[f.code].push_back(&f);
  REQUIRE(by["label-variants"].size() == 1);
  CHECK(by["label-variants"][0]->details.at("labels") ==
        nlohmann::json::array({"Red_Pepper", "red pepper", "red-peppers"}));
  CHECK(by["label-variants"][0]->paths.size() == 36);
  REQUIRE(by["label-near"].size() == 1);
  CHECK(by["label-near"][0]->details.at("labels") == nlohmann::json::array({"cucumbar", "cucumber"}));
  REQUIRE(by["small-class"].size() == 1);
  CHECK(by["small-class"][0]->details.at("label") == "cucumbar");
  REQUIRE(by["empty-class"].size() == 1);
  CHECK(by["empty-class"][0]->paths == std::vector<std::string>{"zucchini"});
  REQUIRE(by["stray-file"].size() == 1);
  CHECK(by["stray-file"][0]->paths == std::vector<std::string>{"zucchini/notes.txt"});
  CHECK(by["class-imbalance"].empty());  // 12 / 3 = 4, under the limit of 10
  Balance b = class_balance(r.records, r.labels);
  CHECK(b.imbalance_ratio == Approx(4.0));
  // Normalised Shannon entropy of (12, 12, 12, 12, 3), computed by hand.
  const double n = 51, ps[] = {12 / n, 12 / n, 12 / n, 12 / n, 3 / n};
  double h = 0;
  for (double p : ps) h -= p * std::log(p);
  CHECK(b.normalized_entropy == Approx(h / std::log(5.0)));
}

TEST_CASE("edit distance and the label key", "[checks][labels]") {
  CHECK(edit_distance("kitten", "sitting") == 3);  // the textbook example (Levenshtein 1966)
  CHECK(edit_distance("", "abc") == 3);
  CHECK(edit_distance("flaw", "lawn") == 2);
  CHECK(label_key("Red_Pepper") == "redpepper");
  CHECK(label_key("red-peppers") == "redpepper");
  CHECK(label_key("bus") == "bus");  // short words keep their final s
}

TEST_CASE("the sharpness statistic equals OpenCV's Laplacian variance bit for bit", "[checks][focus]") {
  // Reference: cv::Laplacian (ksize 1) then cv::meanStdDev, as OpenCV documents them.
  auto reference = [](const cv::Mat& g) {
    cv::Mat lap;
    cv::Laplacian(g, lap, CV_32F);
    cv::Scalar m, sd;
    cv::meanStdDev(lap, m, sd);
    return static_cast<float>(sd[0] * sd[0]);
  };
  size_t compared = 0;
  auto check = [&](const cv::Mat& g, const std::string& name) {
    INFO(name << " " << g.cols << "x" << g.rows);
    CHECK(laplacian_variance(g) == reference(g));
    ++compared;
  };
  // Photographs (Debian visp-images-data), gray, at several sizes.
  for (const auto& rel : test::distinct_photographs()) {
    cv::Mat m = cv::imread((test::kVispDir / rel).string(), cv::IMREAD_GRAYSCALE);
    REQUIRE(!m.empty());
    for (int side : {128, 97, 31}) {
      cv::Mat r;
      cv::resize(m, r, cv::Size(side, side * m.rows / m.cols + 1), 0, 0, cv::INTER_AREA);
      check(r, rel);
    }
  }
  // Fashion-MNIST (Debian dataset-fashion-mnist), every 60th training image.
  const auto fm = test::read_idx_images(test::kFashionMnistDir / "train-images-idx3-ubyte.gz");
  for (uint32_t k = 0; k < fm.count; k += 60)
    check(cv::Mat(28, 28, CV_8UC1, const_cast<uint8_t*>(fm.pixels.data()) + size_t{k} * 784).clone(), "fashion-mnist");
  // Edge sizes, where the reflected border is most of the image, and rows wider
  // than 2,000 columns, which are summed in pieces.
  SplitMix64 rng(11);
  for (auto [w, h] : std::vector<std::pair<int, int>>{{1, 1}, {1, 7}, {7, 1}, {2, 2}, {3, 5}, {2, 9}, {4500, 3}, {2002, 2}}) {
    cv::Mat g(h, w, CV_8UC1);
    for (auto it = g.begin<uint8_t>(); it != g.end<uint8_t>(); ++it) *it = static_cast<uint8_t>(rng.below(256));
    check(g, "noise");
  }
  CHECK(compared > 1000);
}

TEST_CASE("the policy's lookalike section sets the look-alike sensitivity and refuses what it does not know", "[policy][lookalike]") {
  const Policy p = parse_policy(R"({"lookalike": {"radius": 6, "min_correlation": 0.99, "max_local": 0.04, "max_chroma": 0.5, "max_chroma_local": 0.9, "fit_floor": 0.98, "small_side": 20, "screen_radius": 0.07}})");
  CHECK(p.lookalike.radius == 6);
  CHECK(p.lookalike.match.min_correlation == 0.99);
  CHECK(p.lookalike.match.max_local == 0.04);
  CHECK(p.lookalike.match.max_chroma == 0.5);
  CHECK(p.lookalike.match.max_chroma_local == 0.9);
  CHECK(p.lookalike.match.fit_floor == 0.98);
  CHECK(p.lookalike.match.small_side == 20);
  CHECK(p.lookalike.screen_radius == 0.07);
  const Policy d = parse_policy("{}");
  CHECK(d.lookalike.radius == GroupSettings{}.radius);
  CHECK(d.lookalike.match.max_local == MatchSettings{}.max_local);
  CHECK_THROWS_AS(parse_policy(R"({"lookalike": {"max_blur": 1}})"), PolicyError);
  CHECK_THROWS_AS(parse_policy(R"({"lookalike": {"radius": 40}})"), PolicyError);
  CHECK_THROWS_AS(parse_policy(R"({"lookalike": {"min_correlation": 1.5}})"), PolicyError);
  CHECK_THROWS_AS(parse_policy(R"({"lookalike": 3})"), PolicyError);
}

TEST_CASE("a baseline of another report schema version is refused", "[baseline][fault]") {
  // report.json carries schema_version (docs/report.schema.json); a baseline is
  // read only when it is the version this build writes.
  STATIC_REQUIRE(kBaselineReportSchema == kReportSchemaVersion);
  test::TempDir t;
  auto write = [&](const std::string& version) {
    test::write_text(t / "report.json", R"({"schema_version": )" + version +
                                            R"(, "tool": {"name": "tamis", "version": "x"}, "findings": []})");
  };
  write(std::to_string(kReportSchemaVersion));
  CHECK_NOTHROW(load_baseline(t / "report.json"));
  for (const char* bad : {"99", "0", "\"1\"", "1.5", "null"}) {
    INFO(bad);
    write(bad);
    CHECK_THROWS_AS(load_baseline(t / "report.json"), std::runtime_error);
  }
}

TEST_CASE("a size rule every image meets is said once for the set, naming no file", "[checks][size]") {
  // A collection of 20x20 pictures (as Fashion-MNIST is of 28x28 ones): every
  // image is under min_side (32) and input_side (224). The finding says so once
  // with the size; with one larger image among them, it names the small ones.
  test::TempDir t;
  const fs::path cls = t.path() / "swatches";
  fs::create_directories(cls);
  SplitMix64 rng(5);
  auto noise = [&](int side) {
    cv::Mat m(side, side, CV_8UC3);
    for (int y = 0; y < side; ++y)
      for (int x = 0; x < side; ++x) m.at<cv::Vec3b>(y, x) = cv::Vec3b(uint8_t(rng.below(256)), uint8_t(rng.below(256)), uint8_t(rng.below(256)));
    return m;
  };
  for (int k = 0; k < 3; ++k) REQUIRE(cv::imwrite((cls / ("s" + std::to_string(k) + ".png")).string(), noise(20)));
  AuditSettings s;
  s.root = t.path();
  auto find = [](const AuditResult& r, const std::string& code) -> const Finding* {
    for (const auto& f : r.findings)
      if (f.code == code) return &f;
    return nullptr;
  };
  {
    const AuditResult r = run_audit(s);
    for (const char* code : {"tiny-image", "below-input-size"}) {
      const Finding* f = find(r, code);
      REQUIRE(f != nullptr);
      INFO(f->message);
      CHECK(f->paths.empty());
      CHECK(f->details.value("all_images", false));
      CHECK(f->details.at("count") == 3);
      CHECK(f->message.rfind("all images (20x20): ", 0) == 0);  // the count is in details (a baseline keys on the message)
    }
    for (const auto& [path, codes] : codes_by_path(r)) CHECK(codes.count("tiny-image") == 0);
  }
  REQUIRE(cv::imwrite((cls / "large.png").string(), noise(64)));
  {
    const AuditResult r = run_audit(s);
    const Finding* tiny = find(r, "tiny-image");
    REQUIRE(tiny != nullptr);
    CHECK(tiny->paths.size() == 3);
    CHECK(!tiny->details.contains("all_images"));
    const Finding* below = find(r, "below-input-size");
    REQUIRE(below != nullptr);
    CHECK(below->paths.empty());  // 64 px is under 224 as well: still the whole set
    CHECK(below->message.rfind("all images: ", 0) == 0);  // two sizes: none named
  }
}
