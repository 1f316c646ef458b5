// Research aid for the look-alike confirmation (docs/lookalikes.md): writes the
// thumbnails and hashes of the planted sets (tests/support/planted.h) and of
// Fashion-MNIST, with the pairs whose truth is known, for analysis outside the
// project (numpy):
//   DIR/thumbs.u8   N x 3,072 bytes (record.h's thumbnail layout)
//   DIR/phash.u64   N x 8 codes (transform t of each image)
//   DIR/pairs.tsv   kind  family  a  b   (copy pairs: a = source, b = copy;
//                   "distinct" pairs of rendered scenes, family = how)
//   DIR/hits.u32    (8 * i + t, j) of Fashion-MNIST's hash hits at radius 8
//                   (indices 0..69,999 are Fashion-MNIST's images, in path order)
// Usage: lookalike_dump FASHION_MNIST_TREE OUT_DIR [SOURCES_STEP]
#include <algorithm>
#include <cstdio>
#include <filesystem>
#include <fstream>

#include <opencv2/imgcodecs.hpp>

#include "support/photos.h"
#include "support/planted.h"
#include "support/temp_tree.h"
#include "tamis/relate/lookalike_index.h"

using namespace tamis;

int main(int argc, char** argv) {
  if (argc < 3) return 2;
  const std::filesystem::path out = argv[2];
  const size_t step = argc > 3 ? std::stoul(argv[3]) : 100;
  std::filesystem::create_directories(out);
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(argv[1]))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  std::vector<Lookalike> looks;
  for (const auto& f : files) looks.push_back(test::lookalike_of_bytes(test::read_bytes(f)));
  const size_t n_fm = looks.size();
  std::ofstream pairs(out / "pairs.tsv");
  struct Source { std::string family; cv::Mat pixels; size_t index; };
  std::vector<Source> sources;
  for (size_t k = 0; k < files.size(); k += step)
    sources.push_back({"fashion-mnist", cv::imread(files[k].string(), cv::IMREAD_UNCHANGED), k});
  for (const auto& rel : test::distinct_photographs())
    sources.push_back({"visp", cv::imread((test::kVispDir / rel).string(), cv::IMREAD_UNCHANGED), 0});
  for (const auto& sc : test::rendered_scenes(40, 1, 160, 120, 7)) sources.push_back({"scenes", sc.pictures[0], 0});
  for (auto& s : sources)
    if (s.family != "fashion-mnist") {
      s.index = looks.size();
      looks.push_back(test::lookalike_of_bytes(test::encode_copy(s.pixels, 0)));
    }
  const auto& kinds = test::planted_kinds();
  for (const auto& s : sources)
    for (const auto& k : kinds) {
      if (k.colour_only && s.pixels.channels() != 3) continue;
      looks.push_back(test::lookalike_of_bytes(test::encode_copy(k.make(s.pixels), k.jpeg_quality)));
      pairs << k.name << '\t' << s.family << '\t' << s.index << '\t' << looks.size() - 1 << '\n';
    }
  for (const auto& sc : test::rendered_scenes(60, 10, 160, 120, 99)) {
    const size_t first = looks.size();
    for (const auto& p : sc.pictures) looks.push_back(test::lookalike_of_bytes(test::encode_copy(p, 90)));
    for (size_t i = 0; i < sc.pictures.size(); ++i)
      for (size_t j = i + 1; j < sc.pictures.size(); ++j)
        pairs << "distinct\t" << sc.how[i] << " / " << sc.how[j] << '\t' << first + i << '\t' << first + j << '\n';
  }
  std::ofstream thumbs(out / "thumbs.u8", std::ios::binary), codes(out / "phash.u64", std::ios::binary);
  for (const auto& l : looks) {
    thumbs.write(reinterpret_cast<const char*>(l.thumb.data()), static_cast<std::streamsize>(l.thumb.size()));
    codes.write(reinterpret_cast<const char*>(l.phash.data()), sizeof(uint64_t) * kDihedralCount);
  }
  std::vector<uint64_t> variants(n_fm * kDihedralCount), identity(n_fm);
  for (size_t k = 0; k < n_fm; ++k) {
    identity[k] = looks[k].phash[0];
    for (int t = 0; t < kDihedralCount; ++t) variants[k * kDihedralCount + size_t(t)] = looks[k].phash[size_t(t)];
  }
  const PairFilter keep = [](uint32_t v, uint32_t j) { return v / kDihedralCount != j; };
  const auto hits = join_within(variants, identity, 8, 0, keep);
  std::ofstream h(out / "hits.u32", std::ios::binary);
  for (const auto& [v, j] : hits) {
    const uint32_t p[2] = {v, j};
    h.write(reinterpret_cast<const char*>(p), sizeof p);
  }
  std::printf("%zu thumbnails (%zu Fashion-MNIST), %zu hits\n", looks.size(), n_fm, hits.size());
  return 0;
}
