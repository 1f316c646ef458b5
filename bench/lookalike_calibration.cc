// Calibration of the look-alike defaults (docs/lookalikes.md): how far real copies
// land from their originals, and how close distinct images come.
//
//  copies:   each photograph of tests/support/photos.cc turned into every copy kind,
//            encoded, then probed/decoded/hashed exactly as an audit does;
//  distinct: all pairs of the distinct photographs plus 40 frames sampled from three
//            camera sequences, and every pair of Fashion-MNIST images within hash
//            distance 16 (found with the index).
// Prints the hash distance and thumbnail correlation of each copy and histograms
// for the distinct pairs.
//
// Usage: lookalike_calibration [FASHION_MNIST_TREE]
#include <cstdio>
#include <filesystem>
#include <functional>
#include <map>
#include <set>

#include <opencv2/imgcodecs.hpp>

#include "support/photos.h"
#include "support/planted.h"
#include "support/temp_tree.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/features.h"
#include "tamis/read/probe.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/lookalike_index.h"

using namespace tamis;

static double best_corr(const Lookalike& a, const Lookalike& b, int* dist_out) {
  int best_d = 65, best_t = 0;
  for (int t = 0; t < kDihedralCount; ++t) {
    int d = hamming(a.phash[t], b.phash[0]);
    if (d < best_d) { best_d = d; best_t = t; }
  }
  *dist_out = best_d;
  return thumb_correlation(a.thumb, best_t, b.thumb);
}

int main(int argc, char** argv) {
  std::printf("== copies: distance to original (best flip/turn), thumbnail correlation\n");
  std::map<int, int> copy_dist;
  double min_corr = 1.0;
  int max_dist = 0;
  for (const auto& rel : test::distinct_photographs()) {
    auto orig_bytes = test::read_bytes(test::kVispDir / rel);
    Lookalike o = test::lookalike_of_bytes(orig_bytes);
    cv::Mat pixels = cv::imread((test::kVispDir / rel).string(), cv::IMREAD_UNCHANGED);
    for (const auto& k : test::copy_kinds()) {
      Lookalike c = test::lookalike_of_bytes(test::encode_copy(k.make(pixels), k.jpeg_quality));
      int d;
      double corr = best_corr(c, o, &d);
      std::printf("%-52s %-18s dist %2d corr %.4f\n", rel.c_str(), k.name.c_str(), d, corr);
      ++copy_dist[d];
      min_corr = std::min(min_corr, corr);
      max_dist = std::max(max_dist, d);
    }
  }
  std::printf("copies: largest distance %d, smallest correlation %.4f\n", max_dist, min_corr);

  std::printf("== distinct photographs and sampled frames: pairwise distance / correlation\n");
  std::vector<std::string> distinct = test::distinct_photographs();
  for (const char* seq : {"cube/image.%04d.pgm", "mire-2/image.%04d.pgm", "mbt-depth/castel/castel/image_%04d.pgm"})
    for (int f = 10; f <= 400; f += 30) {
      char name[96];
      std::snprintf(name, sizeof name, seq, f);
      if (std::filesystem::exists(test::kVispDir / name)) distinct.push_back(name);
    }
  std::vector<Lookalike> feats;
  for (const auto& rel : distinct) feats.push_back(test::lookalike_of_bytes(test::read_bytes(test::kVispDir / rel)));
  int min_distinct = 64;
  double max_distinct_corr = -1;
  std::map<int, int> hist;
  for (size_t i = 0; i < feats.size(); ++i)
    for (size_t j = i + 1; j < feats.size(); ++j) {
      int d;
      double corr = best_corr(feats[i], feats[j], &d);
      ++hist[d / 4 * 4];
      if (d <= 16) std::printf("close pair: %s ~ %s dist %d corr %.4f\n", distinct[i].c_str(), distinct[j].c_str(), d, corr);
      min_distinct = std::min(min_distinct, d);
      max_distinct_corr = std::max(max_distinct_corr, corr);
    }
  std::printf("%zu images, %zu pairs: smallest distance %d, largest correlation %.4f\n", feats.size(),
              feats.size() * (feats.size() - 1) / 2, min_distinct, max_distinct_corr);
  for (auto [d, n] : hist) std::printf("  distance %2d-%2d: %d pairs\n", d, d + 3, n);

  if (argc > 1) {
    std::printf("== Fashion-MNIST: pairs and groups for each (radius, correlation) setting\n");
    std::vector<Lookalike> fm;
    std::vector<std::filesystem::path> files;
    for (const auto& e : std::filesystem::recursive_directory_iterator(argv[1]))
      if (e.is_regular_file()) files.push_back(e.path());
    std::sort(files.begin(), files.end());
    for (const auto& f : files) fm.push_back(test::lookalike_of_bytes(test::read_bytes(f)));
    std::vector<uint64_t> codes;
    for (const auto& f : fm) codes.push_back(f.phash[0]);
    const int max_r = 10;
    LookalikeIndex index(codes, max_r);
    struct Hit { uint32_t i, j; int d; double corr; };
    std::vector<Hit> all;
    std::vector<uint32_t> hits;
    for (uint32_t i = 0; i < fm.size(); ++i)
      for (int t = 0; t < kDihedralCount; ++t) {
        hits.clear();
        index.query(fm[i].phash[t], max_r, hits);
        for (uint32_t j : hits)
          if (j > i) all.push_back({i, j, hamming(fm[i].phash[t], codes[j]), thumb_correlation(fm[i].thumb, t, fm[j].thumb)});
      }
    std::printf("radius corr   pairs  images-in-groups  groups  largest\n");
    for (int r : {4, 6, 8, 10})
      for (double c : {0.97, 0.98, 0.99, 0.995}) {
        std::vector<uint32_t> parent(fm.size());
        for (uint32_t k = 0; k < parent.size(); ++k) parent[k] = k;
        std::function<uint32_t(uint32_t)> find = [&](uint32_t x) { return parent[x] == x ? x : parent[x] = find(parent[x]); };
        std::set<std::pair<uint32_t, uint32_t>> pairs;
        for (const auto& h : all)
          if (h.d <= r && h.corr >= c) { pairs.insert({h.i, h.j}); parent[find(h.i)] = find(h.j); }
        std::map<uint32_t, size_t> sizes;
        for (uint32_t k = 0; k < parent.size(); ++k) ++sizes[find(k)];
        size_t in_groups = 0, groups = 0, largest = 0;
        for (auto [root, n] : sizes) if (n > 1) { in_groups += n; ++groups; largest = std::max(largest, n); }
        std::printf("%6d %.3f %7zu %17zu %7zu %8zu\n", r, c, pairs.size(), in_groups, groups, largest);
      }
  }
  return 0;
}
