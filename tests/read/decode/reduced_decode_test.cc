// Reduced (libjpeg-turbo scaled) and full decodes give nearly the same DCT hashes
// on real photographs (JPEGs of Debian's visp-images-data). Documented bound:
// at most 4 of 64 bits (docs/lookalikes.md).
#include <catch2/catch.hpp>

#include <opencv2/imgcodecs.hpp>

#include "support/photos.h"
#include "support/temp_tree.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/features.h"
#include "tamis/read/probe.h"
#include "tamis/relate/lookalike_index.h"

using namespace tamis;

TEST_CASE("reduced and full JPEG decodes hash within 4 bits of each other", "[decode][reduced]") {
  const std::vector<std::string> files{
      "Klimt/Klimt.jpeg",
      "Solvay/Solvay_conference_1927_Version2_640x440.jpg",
      "Solvay/Solvay_conference_1927_Version2_1024x705.jpg",
      "Solvay/Solvay_conference_1927_Version2_1280x881.jpg",
      "Solvay/Solvay_conference_1927_Version2_2126x1463.jpg",
      "cube/image.0001.pgm",  // not JPEG: decoded in full both ways, must be 0
  };
  // Not included: mire/mire.jpg, a synthetic target of four dots on black, not a
  // photograph: its hash bits sit on near-zero coefficients and differ by 22 bits
  // between decodes (docs/lookalikes.md, Limits).
  int worst = 0;
  for (const auto& f : files) {
    auto bytes = test::read_bytes(test::kVispDir / f);
    ProbeOutcome p = probe_bytes(bytes);
    REQUIRE(p.defect == Defect::none);
    Decoded reduced = decode_image(bytes, p.info, DecodeLimits{});
    REQUIRE(reduced.defect == Defect::none);
    if (p.info.format == Format::jpeg && std::min(p.info.width, p.info.height) >= 256)
      CHECK(std::min(reduced.reduced.cols, reduced.reduced.rows) < std::min<int>(p.info.width, p.info.height));
    cv::Mat full = cv::imdecode(cv::Mat(1, int(bytes.size()), CV_8U, bytes.data()), cv::IMREAD_UNCHANGED);
    REQUIRE(!full.empty());
    auto a = dct_hashes(hash_thumbnail(reduced.reduced));
    auto b = dct_hashes(hash_thumbnail(full));
    int d = hamming(a[0], b[0]);
    INFO(f << ": " << d << " bits");
    CHECK(d <= 4);
    worst = std::max(worst, d);
  }
  WARN("largest distance between reduced and full decodes: " << worst << " bits");
}

TEST_CASE("the distinct-colour count of a decode is exact up to its cap of 65", "[decode][distinct]") {
  // Truth made here: PNGs (written by OpenCV's libpng) whose pixels take exactly k
  // values, in 1, 3 and 4 channels, opaque white BGRA among them.
  for (int channels : {1, 3, 4}) {
    for (int k : {1, 2, 7, 64, 65, 66, 200}) {
      if (channels == 1 && k > 256) continue;
      cv::Mat img(40, 50, CV_8UC(channels));
      for (int y = 0; y < img.rows; ++y)
        for (int x = 0; x < img.cols; ++x) {
          const int colour = (y * img.cols + x) % k;  // every colour used, all in the first 200 pixels
          uint8_t* p = img.ptr<uint8_t>(y) + x * channels;
          for (int c = 0; c < channels; ++c)
            p[c] = colour == 0 ? 255 : static_cast<uint8_t>((colour * (37 + 50 * c)) % 251);  // 0: white
        }
      std::vector<uint8_t> png;
      REQUIRE(cv::imencode(".png", img, png));
      ProbeOutcome p = probe_bytes(png);
      REQUIRE(p.defect == Defect::none);
      Decoded d = decode_image(png, p.info, DecodeLimits{});
      REQUIRE(d.defect == Defect::none);
      INFO(channels << " channels, " << k << " colours");
      CHECK(d.distinct == std::min(k, 65));
    }
  }
}
