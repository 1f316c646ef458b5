// Writes 32x32 thumbnails and tamis's 8 DCT hashes of each as JSON, for
// dct_hash_reference.py to recompute with scipy (an independent implementation
// of the published method). Thumbnails: the visp photographs and seeded noise.
// Usage: dct_export OUT.json
#include <filesystem>
#include <fstream>

#include <nlohmann/json.hpp>
#include <opencv2/imgcodecs.hpp>

#include "support/photos.h"
#include "tamis/features.h"
#include "tamis/random.h"

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
    out.push_back({{"name", name}, {"pixels", px}, {"codes", hex}});
  };
  for (const auto& rel : tamis::test::distinct_photographs()) {
    cv::Mat m = cv::imread((tamis::test::kVispDir / rel).string(), cv::IMREAD_UNCHANGED);
    if (m.empty()) return 1;
    add(rel, tamis::hash_thumbnail(m));
  }
  tamis::SplitMix64 rng(3);
  for (int k = 0; k < 20; ++k) {
    cv::Mat t(32, 32, CV_8UC1);
    for (auto it = t.begin<uint8_t>(); it != t.end<uint8_t>(); ++it) *it = static_cast<uint8_t>(rng.below(256));
    add("noise" + std::to_string(k), t);
  }
  std::filesystem::path target(argv[1]);
  std::filesystem::create_directories(target.parent_path());
  std::ofstream os(target);
  os << out.dump();
  return os ? 0 : 1;
}
