// Fault tests: damaged files of every supported format, made from good ones.
// Each must be counted as unreadable with a reason, never crash the audit, and the
// totals must account for every file.
#include <catch2/catch.hpp>

#include <zlib.h>

#include <cstring>
#include <filesystem>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/temp_tree.h"
#include "tamis/pipeline/audit.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/probe.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {

std::vector<uint8_t> encode(const std::string& ext, int w = 64, int h = 48) {
  cv::Mat m(h, w, CV_8UC3);
  cv::randu(m, cv::Scalar::all(0), cv::Scalar::all(255));
  cv::GaussianBlur(m, m, cv::Size(5, 5), 1.5);
  std::vector<uchar> buf;
  REQUIRE(cv::imencode(ext, m, buf));
  return std::vector<uint8_t>(buf.begin(), buf.end());
}

void put_be32(std::vector<uint8_t>& b, size_t off, uint32_t v) {
  b[off] = uint8_t(v >> 24);
  b[off + 1] = uint8_t(v >> 16);
  b[off + 2] = uint8_t(v >> 8);
  b[off + 3] = uint8_t(v);
}

// A PNG whose IHDR claims width x height, with a correct CRC (ISO/IEC 15948 s. 5.3).
std::vector<uint8_t> png_claiming(uint32_t w, uint32_t h) {
  auto b = encode(".png");
  put_be32(b, 16, w);
  put_be32(b, 20, h);
  uint32_t crc = static_cast<uint32_t>(crc32(0, b.data() + 12, 17));
  put_be32(b, 29, crc);
  return b;
}

// A JPEG whose SOF0 claims 60000 x 60000 pixels.
std::vector<uint8_t> jpeg_claiming_huge() {
  auto b = encode(".jpg");
  for (size_t i = 2; i + 9 < b.size(); ++i)
    if (b[i] == 0xFF && b[i + 1] == 0xC0) {
      b[i + 5] = 0xEA;  // height 0xEA60 = 60000
      b[i + 6] = 0x60;
      b[i + 7] = 0xEA;
      b[i + 8] = 0x60;
      return b;
    }
  FAIL("no SOF0 marker");
  return b;
}

std::vector<uint8_t> truncated(std::vector<uint8_t> b) {
  b.resize(b.size() / 2);
  return b;
}

// Inverts a run of bytes in the middle of the file (the entropy-coded or pixel data).
std::vector<uint8_t> flipped(std::vector<uint8_t> b, size_t run = 48) {
  size_t at = b.size() / 2;
  for (size_t i = at; i < at + run && i < b.size() - 4; ++i) b[i] ^= 0xFF;
  return b;
}

// Garbles a run of JPEG entropy-coded data without creating a 0xFF byte, so the
// marker chain stays whole and only the decoder can see the damage.
std::vector<uint8_t> garbled_scan(std::vector<uint8_t> b, size_t run) {
  size_t at = b.size() / 2;
  for (size_t i = at; i < at + run && i < b.size() - 4; ++i) b[i] = static_cast<uint8_t>((b[i] ^ 0x55) & 0xFE);
  return b;
}

}  // namespace

TEST_CASE("every kind of damaged file is unreadable with a reason, and the totals add up", "[fault][audit]") {
  test::TempDir t;
  const fs::path root = t / "data";
  struct Case {
    std::string path;
    std::vector<uint8_t> bytes;
    Defect expect;  // Defect::none here means "any reason"
  };
  std::vector<Case> cases;
  for (std::string ext : {".png", ".jpg", ".bmp", ".tif", ".webp", ".ppm"}) {
    std::string f = ext.substr(1);
    cases.push_back({"cls/truncated." + f, truncated(encode(ext)), Defect::none});
    cases.push_back({"cls/empty." + f, {}, Defect::empty_file});
    cases.push_back({"cls/text." + f, std::vector<uint8_t>{'h', 'e', 'l', 'l', 'o', '\n'}, Defect::unknown_format});
  }
  cases.push_back({"cls/truncated_png.png", truncated(encode(".png")), Defect::truncated});
  cases.push_back({"cls/truncated_jpeg.jpg", truncated(encode(".jpg")), Defect::truncated});
  cases.push_back({"cls/flipped.png", flipped(encode(".png")), Defect::bad_checksum});
  cases.push_back({"cls/flipped.jpg", flipped(encode(".jpg", 256, 192), 400), Defect::none});
  cases.push_back({"cls/garbled.jpg", garbled_scan(encode(".jpg", 256, 192), 400), Defect::decode_warning});
  cases.push_back({"cls/huge.png", png_claiming(100000, 100000), Defect::too_many_pixels});
  cases.push_back({"cls/huge.jpg", jpeg_claiming_huge(), Defect::too_many_pixels});
  cases.push_back({"cls/zero_width.png", png_claiming(0, 10), Defect::bad_header});
  cases.push_back({"cls/camera.heic", std::vector<uint8_t>(64, 7), Defect::no_decoder});
  for (const auto& c : cases) test::write_bytes(root / c.path, c.bytes);
  // Good files and files that are not images at all.
  test::write_bytes(root / "cls/good.png", encode(".png"));
  test::write_bytes(root / "cls/good.jpg", encode(".jpg"));
  test::write_text(root / "notes.txt", "not an image\n");
  test::write_text(root / "cls/.hidden.png", "hidden\n");

  AuditSettings s;
  s.root = root;
  AuditResult r = run_audit(s);
  const auto& tt = r.totals;
  CHECK(tt.files_seen == cases.size() + 4);
  CHECK(tt.files_seen == tt.images + tt.masks + tt.unreadable + tt.ignored);
  CHECK(tt.images == 2);
  CHECK(tt.unreadable == cases.size());
  CHECK(tt.ignored == 2);
  for (const auto& c : cases) {
    INFO(c.path);
    auto it = std::find_if(r.records.begin(), r.records.end(), [&](const FileRecord& x) { return x.path == c.path; });
    REQUIRE(it != r.records.end());
    CHECK(it->kind == FileKind::unreadable);
    CHECK(it->defect != Defect::none);
    if (c.expect != Defect::none) CHECK(it->defect == c.expect);
  }
  // Every damaged file appears in exactly one `unreadable` finding, as an error;
  // a file this build cannot decode (the .heic) in `undecodable-variant`, a warning.
  size_t listed = 0, variants = 0;
  for (const auto& f : r.findings)
    if (f.code == "unreadable") {
      CHECK(f.severity == Severity::error);
      listed += f.paths.size();
    } else if (f.code == "undecodable-variant") {
      CHECK(f.severity == Severity::warning);
      variants += f.paths.size();
    }
  CHECK(listed + variants == cases.size());
  CHECK(variants == 1);
  CHECK(policy_exit_status(r) == 1);
}

TEST_CASE("a GIF frame far larger than its screen is refused before its indices are allocated", "[decode][gif]") {
  // Truth constructed here from the GIF89a layout (header, logical screen
  // descriptor, image descriptor, LZW minimum code size, one data sub-block): a
  // 4x4 screen whose first frame claims 65535x65535 pixels. Found by fuzz_decode
  // (tests/fuzz/regressions/decode/gif-frame-larger-than-screen), which asked for 4 GB.
  std::vector<uint8_t> gif = {'G', 'I', 'F', '8', '9', 'a', 4, 0, 4, 0, 0, 0, 0,
                              0x2C, 0, 0, 0, 0, 0xFF, 0xFF, 0xFF, 0xFF, 0, 2, 2, 0x4C, 0x01, 0, 0x3B};
  Defect d = Defect::none;
  CHECK(decode_gif_first_frame(gif, d).empty());
  CHECK(d == Defect::too_many_pixels);  // 4.3 billion pixels > the default 200 million
  DecodeLimits roomy;
  roomy.max_pixels = uint64_t{1} << 40;
  roomy.max_image_bytes = uint64_t{256} << 20;
  CHECK(decode_gif_first_frame(gif, d, roomy).empty());
  CHECK(d == Defect::over_memory_budget);
  // The same frame at the screen's size decodes.
  gif[18] = 4, gif[19] = 0, gif[20] = 4, gif[21] = 0;
  const cv::Mat m = decode_gif_first_frame(gif, d);
  INFO("defect " << defect_code(d));
  CHECK(d == Defect::none);  // a short LZW stream (clear, a few codes, end of information)
  CHECK((m.cols == 4 && m.rows == 4));
}

// A valid TIFF (TIFF 6.0 fields, built byte by byte here) of planar float64 RGB,
// as scikit-image's multipage_rgb.tif: OpenCV does not decode it (nor does
// Pillow), and the probe finds its header and strips whole, so it is a variant
// this build cannot read, a warning, not a damaged file.
TEST_CASE("a whole TIFF of 64-bit float samples that OpenCV cannot read is an unsupported variant", "[decode][tiff]") {
  const uint32_t w = 4, h = 3, planes = 3;
  const uint32_t plane_bytes = w * h * 8;
  std::vector<uint8_t> b;
  auto u16 = [&](uint32_t v) { b.push_back(uint8_t(v)), b.push_back(uint8_t(v >> 8)); };
  auto u32 = [&](uint32_t v) { for (int i = 0; i < 4; ++i) b.push_back(uint8_t(v >> (8 * i))); };
  const uint16_t entries = 11;
  const uint32_t ifd = 8, extra = ifd + 2 + entries * 12 + 4;  // out-of-line values after the IFD
  const uint32_t bps_at = extra, off_at = extra + 6, cnt_at = extra + 18, fmt_at = extra + 30, data = extra + 36;
  b.insert(b.end(), {'I', 'I', 42, 0});
  u32(ifd);
  u16(entries);
  auto entry = [&](uint16_t tag, uint16_t type, uint32_t count, uint32_t value) { u16(tag), u16(type), u32(count), u32(value); };
  entry(256, 4, 1, w);            // ImageWidth
  entry(257, 4, 1, h);            // ImageLength
  entry(258, 3, 3, bps_at);       // BitsPerSample 64, 64, 64
  entry(259, 3, 1, 1);            // no compression
  entry(262, 3, 1, 2);            // RGB
  entry(273, 4, 3, off_at);       // StripOffsets, one strip a plane
  entry(277, 3, 1, planes);       // SamplesPerPixel
  entry(278, 4, 1, h);            // RowsPerStrip
  entry(279, 4, 3, cnt_at);       // StripByteCounts
  entry(284, 3, 1, 2);            // PlanarConfiguration: planar
  entry(339, 3, 3, fmt_at);       // SampleFormat: IEEE float
  u32(0);
  for (int i = 0; i < 3; ++i) u16(64);
  for (uint32_t i = 0; i < planes; ++i) u32(data + i * plane_bytes);
  for (uint32_t i = 0; i < planes; ++i) u32(plane_bytes);
  for (int i = 0; i < 3; ++i) u16(3);
  REQUIRE(b.size() == data);
  for (uint32_t i = 0; i < planes * w * h; ++i) {
    const double v = (i % 7) / 7.0;
    uint8_t raw[8];
    std::memcpy(raw, &v, 8);
    b.insert(b.end(), raw, raw + 8);
  }
  const ProbeOutcome p = probe_bytes(b);
  REQUIRE(p.defect == Defect::none);
  CHECK(p.info.bit_depth == 64);
  const Decoded d = decode_image(b, p.info, DecodeLimits{});
  CHECK(d.defect == Defect::unsupported_variant);
  CHECK(is_undecodable_variant(d.defect));
}
