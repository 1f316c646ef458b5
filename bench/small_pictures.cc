// Look-alike truth for pictures smaller than the thumbnail (docs/lookalikes.md,
// "Pictures under 32 px"), both sides, per picture size S:
//  - copies: Fashion-MNIST images (every SOURCES_STEP-th) reduced to S x S (OpenCV
//    area interpolation), each turned into every planted kind
//    (tests/support/planted.h); a copy is found when its pair with the reduced
//    source is joined;
//  - distinct, S with S: DISTINCT Fashion-MNIST images reduced to S, every pair
//    (no two share their pixels: a join is a false one);
//  - distinct, S with 28: those DISTINCT reductions against as many other
//    Fashion-MNIST images at their own 28 px.
// Each joined pair's correlation and the smaller picture's detail share are
// kept, so one run shows the joins that every threshold rule would keep.
// Usage: small_pictures FASHION_MNIST_TREE [SOURCES_STEP [DISTINCT [SIDES...]]]
// Environment: SMALL_PHOTOS=1 takes 28x28 colour crops of the photograph tiles
// instead of Fashion-MNIST (a second family).
#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <map>
#include <string>
#include <vector>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/photos.h"
#include "support/planted.h"
#include "support/temp_tree.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/lookalike_index.h"
#include "tamis/relate/match.h"

using namespace tamis;

namespace {

cv::Mat reduced(const cv::Mat& m, int side) {
  if (side >= m.cols) return m.clone();
  cv::Mat out;
  cv::resize(m, out, cv::Size(side, side), 0, 0, cv::INTER_AREA);
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) return 2;
  const size_t step = argc > 2 ? std::stoul(argv[2]) : 200;
  const size_t distinct = argc > 3 ? std::stoul(argv[3]) : 2000;
  std::vector<int> sides;
  for (int k = 4; k < argc; ++k) sides.push_back(std::stoi(argv[k]));
  if (sides.empty()) sides = {12, 14, 16, 20, 24, 28};
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(argv[1]))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  std::vector<cv::Mat> pixels(files.size());
  for (size_t i = 0; i < files.size(); ++i) pixels[i] = cv::imread(files[i].string(), cv::IMREAD_UNCHANGED);
  if (std::getenv("SMALL_PHOTOS")) {
    // Another family: non-overlapping 28x28 colour crops of the photograph tiles
    // (planted.h: Debian's python3-sklearn, libjxl-testdata, visp-images-data
    // photographs). Crops of one photograph share textures and light.
    pixels.clear();
    for (const auto& t : test::photograph_tiles())
      for (int y = 0; y + 28 <= t.rows; y += 28)
        for (int x = 0; x + 28 <= t.cols; x += 28) pixels.push_back(t(cv::Rect(x, y, 28, 28)).clone());
    std::printf("photograph crops: %zu\n", pixels.size());
  }
  const size_t count = pixels.size();
  // Each threshold with the other settings at their defaults (the fit's gate
  // follows the threshold, so a stricter one is not a filter on a looser one's joins).
  const double cuts[] = {0.995, 0.996, 0.997, 0.998, 0.999};
  std::vector<GroupSettings> at(std::size(cuts));
  for (size_t c = 0; c < std::size(cuts); ++c) at[c].match.min_correlation = cuts[c];
  // Per threshold, whether the pair is joined (bit c), and by the defaults with
  // the pictures' sizes (bit kRule: the closer correlation under small_side).
  const size_t kRule = std::size(cuts);
  const GroupSettings defaults;
  auto joins = [&](const Lookalike& a, cv::Size sa, const Lookalike& b, cv::Size sb) {
    unsigned bits = 0;
    bool hit = false;
    for (int t = 0; t < kDihedralCount && !hit; ++t)
      hit = hamming(a.phash[t], b.phash[0]) <= at[0].radius || hamming(b.phash[t], a.phash[0]) <= at[0].radius;
    if (!hit) return bits;
    for (size_t c = 0; c < std::size(cuts); ++c) bits |= unsigned(test::pair_joined(a, b, at[c])) << c;
    bits |= unsigned(test::pair_joined(a, sa, b, sb, defaults)) << kRule;
    return bits;
  };
  const auto& kinds = test::planted_kinds();
  // Distinct 28 px partners: images not among the reduced ones.
  std::vector<Lookalike> large;
  for (size_t k = 0; k < distinct; ++k)
    large.push_back(test::lookalike_of_bytes(test::encode_copy(pixels[(k * 2 + 1) * count / (2 * distinct)], 0)));
  for (int side : sides) {
    // Copies of reduced sources.
    std::map<std::string, std::vector<unsigned>> kind_corr;  // per copy, the thresholds it is joined at
    for (size_t k = 0; k < count; k += step) {
      const cv::Mat src = reduced(pixels[k], side);
      const Lookalike ls = test::lookalike_of_bytes(test::encode_copy(src, 0));
      for (const auto& kind : kinds) {
        if (kind.colour_only) continue;
        const cv::Mat copy = kind.make(src);
        if (copy.cols < 1 || copy.rows < 1) continue;
        kind_corr[kind.name].push_back(
            joins(test::lookalike_of_bytes(test::encode_copy(copy, kind.jpeg_quality)), copy.size(), ls, src.size()));
      }
    }
    // Distinct reductions.
    std::vector<Lookalike> small;
    for (size_t k = 0; k < distinct; ++k)
      small.push_back(test::lookalike_of_bytes(test::encode_copy(reduced(pixels[k * count / distinct], side), 0)));
    std::vector<unsigned> ss, sl;
    for (size_t i = 0; i < small.size(); ++i) {
      for (size_t j = i + 1; j < small.size(); ++j)
        if (const unsigned b = joins(small[i], cv::Size(side, side), small[j], cv::Size(side, side))) ss.push_back(b);
      if (side < 28)
        for (const auto& l : large)
          if (const unsigned b = joins(small[i], cv::Size(side, side), l, cv::Size(28, 28))) sl.push_back(b);
    }
    std::printf("== side %d: %zu sources, %zu distinct (%zu pairs among them, %zu with 28 px)\n", side,
                (count + step - 1) / step, distinct, distinct * (distinct - 1) / 2, side < 28 ? distinct * distinct : 0);
    std::printf("%-28s", "threshold");
    for (double c : cuts) std::printf(" %7.3f", c);
    std::printf("    rule\n");
    auto count_at = [](const std::vector<unsigned>& v, size_t c) {
      return size_t(std::count_if(v.begin(), v.end(), [&](unsigned x) { return (x >> c) & 1u; }));
    };
    size_t total = 0;
    std::vector<size_t> found(kRule + 1, 0);
    for (const auto& [name, v] : kind_corr) {
      std::printf("%-28s", name.c_str());
      for (size_t c = 0; c <= kRule; ++c) {
        const size_t n = count_at(v, c);
        found[c] += n;
        std::printf(" %7.3f", double(n) / double(v.size()));
      }
      total += v.size();
      std::printf("\n");
    }
    std::printf("%-28s", "all copies");
    for (size_t c = 0; c <= kRule; ++c) std::printf(" %7.3f", double(found[c]) / double(total));
    std::printf("\n%-28s", "distinct joined S-S");
    for (size_t c = 0; c <= kRule; ++c) std::printf(" %7zu", count_at(ss, c));
    std::printf("\n%-28s", "distinct joined S-28");
    for (size_t c = 0; c <= kRule; ++c) std::printf(" %7zu", count_at(sl, c));
    std::printf("\n");
    std::fflush(stdout);
  }
  return 0;
}
