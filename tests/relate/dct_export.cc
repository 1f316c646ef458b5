// Writes 32x32 thumbnails and tamis's 8 DCT hashes of each as JSON, for
// dct_hash_reference.py to recompute with scipy (an independent implementation
// of the published method). Thumbnails: the visp photographs, 2,000 Fashion-MNIST
// training images (every 30th, read from the Debian package's IDX file), seeded
// noise, a flat image and noise mirrored about an axis: their odd coefficients
// are 0 in exact arithmetic, so half the block ties with the median, and both
// implementations must give exactly 0 there for the bits to agree.
// For every 10th thumbnail it also writes the full DCT (dct32), the DCT of its
// flip/turn 5 derived from the coefficients (turn_coefficients), the inverse of
// the DCT (idct32) and the spectral moments of match.h's profile, which the
// script recomputes from scipy's spectrum.
// Usage: dct_export OUT.json
#include <filesystem>
#include <fstream>

#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>

#include "support/fashion_mnist.h"
#include "support/photos.h"
#include "tamis/base/random.h"
#include "tamis/read/features.h"
#include "tamis/relate/match.h"

int main(int argc, char** argv) {
  if (argc != 2) return 2;
  nlohmann::json out = nlohmann::json::array();
  auto add = [&](const std::string& name, const cv::Mat& thumb) {
    std::vector<int> px(thumb.begin<uint8_t>(), thumb.end<uint8_t>());
    auto codes = tamis::dct_hashes(thumb);
    std::vector<std::string> hex;
    for (uint64_t c : codes) {
      char buf[17];
      std::snprintf(buf, sizeof buf, "%016llx", static_cast<unsigned long long>(c));
      hex.push_back(buf);
    }
    nlohmann::json item = {{"name", name}, {"pixels", px}, {"codes", hex}};
    if (out.size() % 10 == 0) {
      std::vector<float> c(1024), turned(1024), back(1024);
      tamis::dct32(thumb.ptr<uint8_t>(0), c.data());
      tamis::turn_coefficients(c.data(), turned.data(), 5);
      tamis::idct32(c.data(), back.data());
      tamis::Thumbnail th{};
      std::copy(thumb.begin<uint8_t>(), thumb.end<uint8_t>(), th.begin());
      const tamis::MatchProfile p = tamis::match_profile(th);
      item["dct"] = c;
      item["dct_turn5"] = turned;
      item["idct"] = back;
      item["flat"] = p.flat;
      item["lambda_mean"] = p.lambda_mean;
      item["lambda_var"] = p.lambda_var;
    }
    out.push_back(item);
  };
  for (const auto& rel : tamis::test::distinct_photographs()) {
    cv::Mat m = cv::imread((tamis::test::kVispDir / rel).string(), cv::IMREAD_UNCHANGED);
    if (m.empty()) return 1;
    add(rel, tamis::hash_thumbnail(m));
  }
  const auto fm = tamis::test::read_idx_images(tamis::test::kFashionMnistDir / "train-images-idx3-ubyte.gz");
  for (uint32_t k = 0; k < fm.count; k += 30) {
    cv::Mat img(static_cast<int>(fm.rows), static_cast<int>(fm.cols), CV_8UC1,
                const_cast<uint8_t*>(fm.pixels.data()) + size_t{k} * fm.rows * fm.cols);
    add("fashion-mnist train " + std::to_string(k), tamis::hash_thumbnail(img));
  }
  tamis::SplitMix64 rng(3);
  for (int k = 0; k < 20; ++k) {
    cv::Mat t(32, 32, CV_8UC1);
    for (auto it = t.begin<uint8_t>(); it != t.end<uint8_t>(); ++it) *it = static_cast<uint8_t>(rng.below(256));
    add("noise" + std::to_string(k), t);
  }
  for (int axes = 1; axes <= 3; ++axes) {  // 1: left-right, 2: top-bottom, 3: both
    cv::Mat t(32, 32, CV_8UC1);
    for (int y = 0; y < 32; ++y)
      for (int x = 0; x < 32; ++x) t.at<uint8_t>(y, x) = static_cast<uint8_t>(rng.below(256));
    for (int y = 0; y < 32; ++y)
      for (int x = 0; x < 32; ++x) {
        const int sy = (axes & 2) && y >= 16 ? 31 - y : y, sx = (axes & 1) && x >= 16 ? 31 - x : x;
        t.at<uint8_t>(y, x) = t.at<uint8_t>(sy, sx);
      }
    add("mirrored noise " + std::to_string(axes), t);
  }
  add("flat", cv::Mat(32, 32, CV_8UC1, cv::Scalar(77)));
  std::filesystem::path target(argv[1]);
  std::filesystem::create_directories(target.parent_path());
  std::ofstream os(target);
  os << out.dump();
  return os ? 0 : 1;
}
