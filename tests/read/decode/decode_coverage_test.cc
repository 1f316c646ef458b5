// Decoding coverage and decoder isolation.
//
// Reference: Pillow (Debian python3-pil). tests/fixtures/decode_coverage.py lists
// every image file of Debian's libjxl-testdata and visp-images-data packages and
// JPEGs written in many sampling layouts and codings (Pillow's writer and
// libjpeg-turbo's cjpeg), with what Pillow makes of each. A file is read by tamis
// exactly when Pillow reads it, with Pillow's width, height and colour layout.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <map>
#include <set>

#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/temp_tree.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/probe.h"
#include "tamis/read/read_stage.h"
#include "tamis/read/walk.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {

// Pillow's mode names for tamis's colour layouts (Pillow's "I" is its 32-bit
// integer mode, in which it opens 16-bit gray PNG and PGM files).
std::set<std::string> pillow_modes_for(ColorMode m, int bits) {
  switch (m) {
    case ColorMode::gray:
      if (bits == 1) return {"1", "L"};
      return bits > 8 ? std::set<std::string>{"I", "I;16", "I;16B"} : std::set<std::string>{"L"};
    case ColorMode::graya: return {"LA", "La", "RGBA"};  // Pillow opens some gray+alpha PNGs as RGBA
    case ColorMode::palette: return {"P", "PA", "1", "L"};
    case ColorMode::rgb: return {"RGB"};
    case ColorMode::rgba: return {"RGBA"};
    case ColorMode::cmyk: return {"CMYK"};
    default: return {};
  }
}

}  // namespace

TEST_CASE("every file Pillow reads is read, with Pillow's size and layout, and no other", "[decode][pillow][coverage]") {
  std::string root = test::env_or_empty("TAMIS_TEST_DATA");
  REQUIRE_FALSE(root.empty());
  const fs::path list = fs::path(root) / "coverage" / "coverage.json";
  REQUIRE(fs::exists(list));
  nlohmann::json expect;
  std::ifstream(list) >> expect;
  REQUIRE(expect.size() >= 1300);  // ~1,180 package files and ~250 written JPEGs
  size_t read = 0, layouts = 0;
  std::map<std::string, int> disagreements;
  for (const auto& [path, e] : expect.items()) {
    INFO(path);
    const auto bytes = test::read_bytes(path);
    const ProbeOutcome p = probe_bytes(bytes);
    Decoded d;
    if (p.defect == Defect::none) d = decode_image(bytes, p.info, DecodeLimits{});
    const bool ours = p.defect == Defect::none && d.defect == Defect::none && !d.reduced.empty();
    const bool pillow = e.at("pillow_reads").get<bool>();
    if (ours != pillow) {
      ++disagreements[std::string(defect_code(p.defect != Defect::none ? p.defect : d.defect))];
      UNSCOPED_INFO(path << ": tamis " << (ours ? "reads" : "refuses") << " ("
                         << defect_code(p.defect != Defect::none ? p.defect : d.defect) << "), Pillow "
                         << (pillow ? "reads" : "refuses"));
    }
    CHECK(ours == pillow);
    if (!ours || !pillow) continue;
    ++read;
    layouts += path.find("cjpeg_") != std::string::npos;
    CHECK(p.info.width == e.at("width").get<uint32_t>());
    CHECK(p.info.height == e.at("height").get<uint32_t>());
    const auto modes = pillow_modes_for(p.info.mode, p.info.bit_depth);
    CHECK(modes.count(e.at("mode").get<std::string>()) == 1);
  }
  CHECK(disagreements.empty());
  CHECK(read >= 1300);
  CHECK(layouts >= 200);  // the rare sampling layouts were written and read
}

namespace {

// JPEG damage of several kinds, each of which libjpeg refuses.
std::vector<uint8_t> damage_jpeg(std::vector<uint8_t> b, int kind) {
  auto find = [&](uint8_t marker) {
    for (size_t i = 2; i + 1 < b.size(); ++i)
      if (b[i] == 0xFF && b[i + 1] == marker) return i;
    return size_t{0};
  };
  switch (kind) {
    case 0: {  // every code count of the first Huffman table 0
      const size_t at = find(0xC4);
      REQUIRE(at > 0);
      for (size_t k = 0; k < 16; ++k) b[at + 5 + k] = 0;
      break;
    }
    case 1: {  // one code count 0 (the table no longer holds its values)
      const size_t at = find(0xC4);
      REQUIRE(at > 0);
      for (size_t k = 0; k < 16; ++k)
        if (b[at + 5 + k] != 0) {
          b[at + 5 + k] = 0;
          break;
        }
      break;
    }
    case 2: {  // an over-full table: counts that no prefix code can hold
      const size_t at = find(0xC4);
      REQUIRE(at > 0);
      b[at + 5] = 3;
      break;
    }
    case 3:  // cut in the middle of the scan
      b.resize(b.size() / 2);
      break;
    case 4: {  // scan data overwritten with markers that do not belong there
      const size_t at = find(0xDA);
      REQUIRE(at > 0);
      for (size_t i = at + 20; i + 1 < b.size() - 2; i += 7) {
        b[i] = 0xFF;
        b[i + 1] = 0xD9 - static_cast<uint8_t>(i % 3);
      }
      break;
    }
    default: {  // the frame header's component count 0
      const size_t at = find(0xC0);
      REQUIRE(at > 0);
      b[at + 9] = 0;
      break;
    }
  }
  return b;
}

}  // namespace

TEST_CASE("a failed decode changes no other file's result, on any thread count", "[decode][isolation][threads]") {
  test::TempDir dir;
  cv::Mat pic(96, 128, CV_8UC3);
  cv::randu(pic, 0, 255);
  cv::GaussianBlur(pic, pic, cv::Size(9, 9), 3);
  std::vector<uint8_t> jpeg, png, gif_bytes;
  REQUIRE(cv::imencode(".jpg", pic, jpeg));
  REQUIRE(cv::imencode(".png", pic, png));
  // Damaged files sort first and between the good ones ("a…" before "b…", and so on).
  int n_good = 0, n_bad = 0;
  for (int k = 0; k < 6; ++k) {
    test::write_bytes(dir / ("c/" + std::string(1, char('a' + 2 * k)) + "_bad.jpg"), damage_jpeg(jpeg, k));
    ++n_bad;
    for (int g = 0; g < 3; ++g) {
      cv::Mat shifted = pic.clone();
      shifted += cv::Scalar(g * 20 + k, k * 7, 0);
      std::vector<uint8_t> good;
      REQUIRE(cv::imencode(k % 2 ? ".png" : ".jpg", shifted, good));
      test::write_bytes(dir / ("c/" + std::string(1, char('b' + 2 * k)) + "_good" + std::to_string(g) +
                               (k % 2 ? ".png" : ".jpg")),
                        good);
      ++n_good;
    }
  }
  // Damaged PNGs (bad CRC, cut IDAT, garbage in the deflate stream) and GIFs (cut, bad LZW).
  std::vector<uint8_t> bad_png = png;
  bad_png[bad_png.size() / 2] ^= 0x5A;
  test::write_bytes(dir / "c/m_bad.png", bad_png);
  test::write_bytes(dir / "c/m_cut.png", std::vector<uint8_t>(png.begin(), png.begin() + png.size() / 3));
  const std::vector<uint8_t> gif = {'G', 'I', 'F', '8', '9', 'a', 4, 0, 4, 0, 0x80, 0, 0, 0, 0, 0, 255, 255, 255,
                                    0x2C, 0, 0, 0, 0, 4, 0, 4, 0, 0, 2, 3, 0xFF, 0xFF, 0xFF, 0, 0x3B};
  test::write_bytes(dir / "c/n_bad.gif", gif);
  n_bad += 3;
  for (int g = 0; g < 3; ++g) {
    std::vector<uint8_t> good;
    REQUIRE(cv::imencode(".jpg", pic * (0.5 + 0.2 * g), good));
    test::write_bytes(dir / ("c/o_good" + std::to_string(g) + ".jpg"), good);
    ++n_good;
  }

  const WalkResult w = walk_tree(dir.path(), 1);
  std::vector<std::string> first;
  for (unsigned threads : {1u, 2u, 4u, 2u, 4u, 1u}) {
    INFO("threads " << threads);
    ReadOptions ro;
    ro.threads = threads;
    const auto recs = read_files(dir.path(), w.files, ro);
    std::vector<std::string> summary;
    int good = 0, bad = 0;
    for (const auto& r : recs) {
      INFO(r.path);
      const bool is_good = r.path.find("_good") != std::string::npos;
      CHECK((r.kind == FileKind::image) == is_good);
      (r.kind == FileKind::image ? good : bad)++;
      summary.push_back(r.path + " " + std::string(defect_code(r.defect)) + " " +
                        std::to_string(r.features.look.phash[0]));
    }
    CHECK(good == n_good);
    CHECK(bad == n_bad);
    if (first.empty())
      first = summary;
    else
      CHECK(summary == first);
  }
}

TEST_CASE("a JPEG of a variant libjpeg does not implement is not called damaged", "[decode][variant]") {
  // The truth is the JPEG standard (ITU-T T.81, table B.1): SOF3 marks the lossless
  // process and a frame precision of 12 the extended one; this build's libjpeg
  // implements neither (8-bit only). A frame header rewritten so is a file of
  // that variant, not damage; a Huffman table emptied is damage.
  cv::Mat pic(40, 56, CV_8UC3, cv::Scalar(30, 120, 200));
  cv::circle(pic, {20, 20}, 12, cv::Scalar(200, 40, 90), cv::FILLED);
  std::vector<uint8_t> jpeg;
  REQUIRE(cv::imencode(".jpg", pic, jpeg));
  size_t sof = 0;
  for (size_t i = 2; i + 1 < jpeg.size() && !sof; ++i)
    if (jpeg[i] == 0xFF && jpeg[i + 1] == 0xC0) sof = i;
  REQUIRE(sof > 0);
  auto decode = [](const std::vector<uint8_t>& b) {
    const ProbeOutcome p = probe_bytes(b);
    return p.defect != Defect::none ? p.defect : decode_image(b, p.info, DecodeLimits{}).defect;
  };
  CHECK(decode(jpeg) == Defect::none);
  std::vector<uint8_t> lossless = jpeg;
  lossless[sof + 1] = 0xC3;
  CHECK(decode(lossless) == Defect::unsupported_variant);
  std::vector<uint8_t> twelve_bit = jpeg;
  twelve_bit[sof + 4] = 12;  // P, after the marker and the 2-byte length
  CHECK(decode(twelve_bit) == Defect::unsupported_variant);
  CHECK(is_undecodable_variant(Defect::unsupported_variant));
  CHECK(decode(damage_jpeg(jpeg, 0)) != Defect::unsupported_variant);
}
