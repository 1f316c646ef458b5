// The direct PNG path (decode.h) against libpng, through OpenCV's imdecode: on
// every PNG it takes, the pixels must be libpng's exactly; on damaged data it
// must decline whenever libpng refuses. Files: Debian's visp-images-data PNGs
// (real files from several writers), the Pillow fixture PNGs, Fashion-MNIST, and
// damaged copies made here.
#include <catch2/catch.hpp>

#include <zlib.h>

#include <filesystem>

#include <opencv2/imgcodecs.hpp>

#include "support/fashion_mnist.h"
#include "support/photos.h"
#include "support/temp_tree.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/probe.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {

struct Tally {
  size_t files = 0, direct = 0;
};

cv::Mat libpng_pixels(const std::vector<uint8_t>& bytes) {
  cv::Mat buf(1, static_cast<int>(bytes.size()), CV_8U, const_cast<uint8_t*>(bytes.data()));
  try {
    return cv::imdecode(buf, cv::IMREAD_UNCHANGED | cv::IMREAD_IGNORE_ORIENTATION);
  } catch (const cv::Exception&) {
    return {};
  }
}

// Checks one file; returns whether the direct path took it.
bool check_png(const std::vector<uint8_t>& bytes, const std::string& name) {
  INFO(name);
  ProbeOutcome p = probe_bytes(bytes);
  if (p.info.format != Format::png || p.defect != Defect::none) return false;  // decode is never asked
  cv::Mat direct;
  const bool took = decode_png_direct(bytes, p.info, direct);
  const cv::Mat ref = libpng_pixels(bytes);
  if (!took) return false;
  REQUIRE_FALSE(ref.empty());  // libpng refused what the direct path took
  REQUIRE(direct.type() == ref.type());
  REQUIRE(direct.size() == ref.size());
  CHECK(cv::norm(direct, ref, cv::NORM_INF) == 0);
  return true;
}

// A PNG's chunks, to make damaged copies with valid CRCs (so the probe passes
// them on and only the decoder can tell).
struct Chunk {
  std::string type;
  std::vector<uint8_t> data;
};
std::vector<Chunk> chunks_of(const std::vector<uint8_t>& b) {
  std::vector<Chunk> out;
  for (size_t off = 8; off + 12 <= b.size();) {
    const uint32_t len = (uint32_t{b[off]} << 24) | (uint32_t{b[off + 1]} << 16) | (uint32_t{b[off + 2]} << 8) | b[off + 3];
    out.push_back({std::string(b.begin() + off + 4, b.begin() + off + 8),
                   std::vector<uint8_t>(b.begin() + off + 8, b.begin() + off + 8 + len)});
    off += 12 + len;
  }
  return out;
}
std::vector<uint8_t> png_of(const std::vector<Chunk>& chunks) {
  std::vector<uint8_t> out{0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
  for (const auto& c : chunks) {
    const uint32_t len = static_cast<uint32_t>(c.data.size());
    for (int s = 24; s >= 0; s -= 8) out.push_back(static_cast<uint8_t>(len >> s));
    out.insert(out.end(), c.type.begin(), c.type.end());
    out.insert(out.end(), c.data.begin(), c.data.end());
    uLong crc = crc32(0L, reinterpret_cast<const Bytef*>(c.type.data()), 4);
    if (len) crc = crc32(crc, c.data.data(), len);
    for (int s = 24; s >= 0; s -= 8) out.push_back(static_cast<uint8_t>(crc >> s));
  }
  return out;
}

}  // namespace

TEST_CASE("the direct PNG path gives libpng's pixels on real files", "[decode][png]") {
  Tally t;
  for (const auto& e : fs::recursive_directory_iterator(test::kVispDir))
    if (e.path().extension() == ".png") {
      ++t.files;
      t.direct += check_png(test::read_bytes(e.path()), e.path().string());
    }
  if (std::string root = test::env_or_empty("TAMIS_TEST_DATA"); !root.empty())
    for (const auto& e : fs::directory_iterator(fs::path(root) / "pillow"))
      if (e.path().extension() == ".png") {
        ++t.files;
        t.direct += check_png(test::read_bytes(e.path()), e.path().string());
      }
  // Fashion-MNIST: every 20th file (3,500).
  std::vector<fs::path> fm;
  for (const auto& e : fs::recursive_directory_iterator(test::fashion_mnist_tree()))
    if (e.is_regular_file()) fm.push_back(e.path());
  std::sort(fm.begin(), fm.end());
  size_t fm_direct = 0, fm_files = 0;
  for (size_t k = 0; k < fm.size(); k += 20, ++fm_files) fm_direct += check_png(test::read_bytes(fm[k]), fm[k].string());
  INFO(t.direct << " of " << t.files << " visp and Pillow PNGs taken");
  CHECK(fm_direct == fm_files);  // 8-bit grey, the common case: all taken
  CHECK(t.direct >= t.files / 2);
}

TEST_CASE("the direct PNG path declines damaged data that libpng refuses", "[decode][png][fault]") {
  // Originals: three of the visp PNGs (grey and colour) and a colour PNG written here by OpenCV.
  std::vector<std::vector<uint8_t>> originals;
  for (const char* f : {"warp/cv_warp_affine_SRT_gray_NN.png", "warp/pil_warp_perspective_color_bilinear.png",
                        "warp/cv_warp_affine_rot_45_color_bilinear.png"})
    originals.push_back(test::read_bytes(test::kVispDir / f));
  cv::Mat rgba(37, 53, CV_8UC4);
  cv::randu(rgba, 0, 256);
  std::vector<uint8_t> enc;
  REQUIRE(cv::imencode(".png", rgba, enc));
  originals.push_back(enc);
  size_t variants = 0, refused_by_libpng = 0;
  for (const auto& orig : originals) {
    REQUIRE(check_png(orig, "original"));
    const auto chunks = chunks_of(orig);
    std::vector<uint8_t> idat;  // all IDAT data, then re-cut
    size_t first = chunks.size();
    for (size_t c = 0; c < chunks.size(); ++c)
      if (chunks[c].type == "IDAT") {
        first = std::min(first, c);
        idat.insert(idat.end(), chunks[c].data.begin(), chunks[c].data.end());
      }
    REQUIRE(first < chunks.size());
    auto with_idat = [&](const std::vector<std::vector<uint8_t>>& parts) {
      std::vector<Chunk> out;
      for (size_t c = 0; c < chunks.size(); ++c) {
        if (chunks[c].type == "IDAT") {
          if (c == first)
            for (const auto& p : parts) out.push_back({"IDAT", p});
          continue;
        }
        out.push_back(chunks[c]);
      }
      return png_of(out);
    };
    std::vector<std::vector<uint8_t>> damaged;
    for (size_t at : {size_t{2}, idat.size() / 3, idat.size() / 2, idat.size() - 5, idat.size() - 1}) {
      auto cut = std::vector<uint8_t>(idat.begin(), idat.begin() + static_cast<long>(at));
      damaged.push_back(with_idat({cut}));  // truncated stream
      auto flipped = idat;
      flipped[at] ^= 0x5a;
      damaged.push_back(with_idat({flipped}));  // corrupted stream or checksum
    }
    auto longer = idat;
    longer.insert(longer.end(), {1, 2, 3, 4});
    damaged.push_back(with_idat({longer}));  // data after the stream
    // The same data cut into many IDAT chunks: valid, and must still be taken.
    std::vector<std::vector<uint8_t>> pieces;
    for (size_t k = 0; k < idat.size(); k += 97)
      pieces.emplace_back(idat.begin() + static_cast<long>(k), idat.begin() + static_cast<long>(std::min(idat.size(), k + 97)));
    CHECK(check_png(with_idat(pieces), "cut into 97-byte IDAT chunks"));
    for (const auto& d : damaged) {
      ++variants;
      refused_by_libpng += libpng_pixels(d).empty();
      check_png(d, "damaged copy " + std::to_string(variants));  // takes only what libpng decodes identically
    }
  }
  INFO(refused_by_libpng << " of " << variants << " damaged copies refused by libpng");
  CHECK(refused_by_libpng > 0);
}
