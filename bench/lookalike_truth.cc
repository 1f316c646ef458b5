// Look-alike truth on planted sets, both sides (docs/lookalikes.md):
//  - recall per copy kind (tests/support/planted.h: resampling, flips/turns,
//    re-encoding, tone, colour, blur, sharpening, noise) on Fashion-MNIST images,
//    the visp photographs and rendered colour scenes;
//  - distinct pictures joined: every pair within a rendered scene (shared smooth
//    backdrop; objects that stand out in hue: other, moved, recoloured, small);
//  - Fashion-MNIST images grouped by find_groups (70,000 distinct images);
//  - the trade-off: the same for a grid of correlation thresholds and of
//    (max_local, max_chroma).
// Usage: lookalike_truth FASHION_MNIST_TREE [SOURCES_STEP [DETAIL]]
// (DETAIL: any third argument prints the recall per kind at every threshold)
// Environment: TRUTH_QUICK=1 stops after the defaults; TRUTH_WHY=FAMILY prints,
// for each missed copy of that family, the hash distance and the match's measures.
#include <algorithm>
#include <chrono>
#include <cstdlib>
#include <cstdio>
#include <filesystem>
#include <map>

#include <opencv2/imgcodecs.hpp>

#include "support/photos.h"
#include "support/planted.h"
#include "support/temp_tree.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/lookalike_index.h"
#include "tamis/relate/match.h"

using namespace tamis;

int main(int argc, char** argv) {
  if (argc < 2) return 2;
  const size_t step = argc > 2 ? std::stoul(argv[2]) : 100;
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(argv[1]))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  struct Source { std::string family; cv::Mat pixels; Lookalike look; PictureSize ps; };
  std::vector<Source> sources;
  for (size_t k = 0; k < files.size(); k += step)
    sources.push_back({"fashion-mnist", cv::imread(files[k].string(), cv::IMREAD_UNCHANGED), {}, {}});
  for (const auto& rel : test::distinct_photographs())
    sources.push_back({"visp", cv::imread((test::kVispDir / rel).string(), cv::IMREAD_UNCHANGED), {}, {}});
  for (const auto& sc : test::rendered_scenes(40, 1, 160, 120, 7)) sources.push_back({"scenes", sc.pictures[0], {}, {}});
  const auto tiles = test::photograph_tiles();
  for (const auto& t : tiles) sources.push_back({"photos", t, {}, {}});
  for (auto& s : sources) {
    const auto bytes = test::encode_copy(s.pixels, 0);
    s.look = test::lookalike_of_bytes(bytes);
    s.ps = test::picture_of_bytes(bytes);
  }
  // Copies, made once.
  struct Copy { size_t source; size_t kind; Lookalike look; cv::Size size; PictureSize ps; };
  std::vector<Copy> copies;
  const auto& kinds = test::planted_kinds();
  for (size_t si = 0; si < sources.size(); ++si)
    for (size_t ki = 0; ki < kinds.size(); ++ki) {
      if (kinds[ki].colour_only && sources[si].pixels.channels() != 3) continue;
      const cv::Mat copy = kinds[ki].make(sources[si].pixels);
      const auto bytes = test::encode_copy(copy, kinds[ki].jpeg_quality);
      copies.push_back({si, ki, test::lookalike_of_bytes(bytes), copy.size(), test::picture_of_bytes(bytes)});
    }
  const auto scenes = test::rendered_scenes(60, 10, 160, 120, 99);
  std::vector<std::vector<Lookalike>> scene_looks;
  for (const auto& sc : scenes) {
    scene_looks.emplace_back();
    for (const auto& p : sc.pictures) scene_looks.back().push_back(test::lookalike_of_bytes(test::encode_copy(p, 90)));
  }
  // Distinct photograph tiles (pairs of tiles of one photograph share textures).
  std::vector<Lookalike> tile_looks;
  for (const auto& t : tiles) tile_looks.push_back(test::lookalike_of_bytes(test::encode_copy(t, 90)));
  // The same distinct pictures with the second of each pair hue-turned by 40
  // degrees (a whole-picture colour change on top of the difference).
  std::vector<std::vector<Lookalike>> scene_turned;
  for (const auto& sc : scenes) {
    scene_turned.emplace_back();
    for (const auto& p : sc.pictures) scene_turned.back().push_back(test::lookalike_of_bytes(test::encode_copy(test::hue_turned(p, 40), 90)));
  }
  std::vector<Lookalike> tile_turned;
  for (const auto& t : tiles) tile_turned.push_back(test::lookalike_of_bytes(test::encode_copy(test::hue_turned(t, 40), 90)));
  // Fashion-MNIST records for find_groups.
  std::vector<FileRecord> records(files.size());
  ThumbnailTable thumbs;
  thumbs.assign_all(files.size());
  for (size_t i = 0; i < files.size(); ++i) {
    const Lookalike l = test::lookalike_of_bytes(test::read_bytes(files[i]));
    records[i].path = files[i].string();
    records[i].kind = FileKind::image;
    records[i].features.has_lookalike = records[i].features.has_content_hash = true;
    records[i].features.content_hash = {i, 1};
    records[i].features.look = l;
    thumbs.at(i) = l.thumb;
  }

  auto evaluate = [&](const GroupSettings& gs, bool detail) {
    std::map<std::string, std::pair<int, int>> per_kind;  // found, total
    std::map<std::string, std::pair<int, int>> per_family;
    std::map<std::pair<std::string, std::string>, std::pair<int, int>> per_kind_family;
    for (const auto& c : copies) {
      const bool ok = test::pair_joined(c.look, sources[c.source].look, gs, c.ps, sources[c.source].ps);
      auto& k = per_kind[kinds[c.kind].name];
      k.first += ok;
      ++k.second;
      auto& f = per_family[sources[c.source].family];
      f.first += ok;
      ++f.second;
      auto& kf = per_kind_family[{kinds[c.kind].name, sources[c.source].family}];
      kf.first += ok;
      ++kf.second;
    }
    std::map<std::string, int> wrong;
    int distinct_pairs = 0, distinct_joined = 0;
    for (size_t s = 0; s < scenes.size(); ++s)
      for (size_t i = 0; i < scene_looks[s].size(); ++i)
        for (size_t j = i + 1; j < scene_looks[s].size(); ++j) {
          ++distinct_pairs;
          if (test::pair_joined(scene_looks[s][i], scene_looks[s][j], gs)) {
            ++distinct_joined;
            ++wrong[scenes[s].how[i] + " / " + scenes[s].how[j]];
          }
        }
    int tiles_joined = 0;
    for (size_t i = 0; i < tile_looks.size(); ++i)
      for (size_t j = i + 1; j < tile_looks.size(); ++j) tiles_joined += test::pair_joined(tile_looks[i], tile_looks[j], gs);
    int turned_scenes = 0, turned_tiles = 0;
    for (size_t sc = 0; sc < scenes.size(); ++sc)
      for (size_t i = 0; i < scene_looks[sc].size(); ++i)
        for (size_t j = i + 1; j < scene_looks[sc].size(); ++j)
          if (test::pair_joined(scene_looks[sc][i], scene_turned[sc][j], gs)) {
            ++turned_scenes;
            ++wrong["turned: " + scenes[sc].how[i] + " / " + scenes[sc].how[j]];
          }
    for (size_t i = 0; i < tile_looks.size(); ++i)
      for (size_t j = i + 1; j < tile_looks.size(); ++j) turned_tiles += test::pair_joined(tile_looks[i], tile_turned[j], gs);
    const GroupResult g = find_groups(records, thumbs, gs);
    size_t grouped = 0;
    for (const auto& grp : g.groups) grouped += grp.members.size();
    int worst_found = 1, worst_total = 1;
    std::string worst;
    for (const auto& [name, ft] : per_kind)
      if (double(ft.first) / ft.second < double(worst_found) / worst_total) {
        worst_found = ft.first;
        worst_total = ft.second;
        worst = name;
      }
    std::printf("local %.3f chroma %.2f corr %.3f | lowest recall %s %d/%d | distinct joined %d/%d, tiles %d/%zu, "
                "one side hue-turned %d + %d | fashion-mnist grouped %zu\n",
                gs.match.max_local, gs.match.max_chroma, gs.match.min_correlation, worst.c_str(), worst_found, worst_total, distinct_joined,
                distinct_pairs, tiles_joined, tile_looks.size() * (tile_looks.size() - 1) / 2, turned_scenes, turned_tiles, grouped);
    if (!detail) return;
    std::printf("%-26s %s\n", "kind", "found / copies");
    for (const auto& [name, ft] : per_kind) std::printf("%-26s %4d / %4d  %.3f\n", name.c_str(), ft.first, ft.second, double(ft.first) / ft.second);
    std::printf("%-26s", "recall by family");
    for (const auto& [fam, ft] : per_family) std::printf(" %13s", fam.c_str());
    std::printf("\n");
    for (const auto& [name, ft] : per_kind) {
      std::printf("%-26s", name.c_str());
      for (const auto& [fam, ff] : per_family) {
        const auto it = per_kind_family.find({name, fam});
        if (it == per_kind_family.end()) std::printf(" %13s", "-");
        else std::printf("  %3d/%3d %.2f", it->second.first, it->second.second, double(it->second.first) / it->second.second);
      }
      std::printf("\n");
    }
    for (const auto& [name, ft] : per_family) std::printf("family %-19s %4d / %4d\n", name.c_str(), ft.first, ft.second);
    for (const auto& [how, n] : wrong) std::printf("joined distinct: %-40s %d\n", how.c_str(), n);
  };
  if (std::getenv("TRUTH_CHROMA_LOCAL")) {  // the colour check's local share: joined copies per kind, joined distinct pairs
    GroupSettings gs;
    auto joined_match = [&](const Lookalike& a, const Lookalike& b, Match& out) {
      for (int t = 0; t < kDihedralCount; ++t) {
        if (hamming(a.phash[t], b.phash[0]) <= gs.radius && (out = match_thumbnails(a.thumb, t, b.thumb, gs.match)).joined) return true;
        if (hamming(b.phash[t], a.phash[0]) <= gs.radius && (out = match_thumbnails(b.thumb, t, a.thumb, gs.match)).joined) return true;
      }
      return false;
    };
    const double cuts[] = {0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 1.0};
    std::map<std::string, std::vector<float>> per_kind;
    for (const auto& c : copies) {
      Match m;
      if (joined_match(c.look, sources[c.source].look, m) && m.chroma >= 0)
        per_kind[kinds[c.kind].name + "/" + sources[c.source].family].push_back(m.chroma_local);
    }
    std::vector<int> lost(8, 0);
    for (auto& [name, v] : per_kind) {
      std::sort(v.begin(), v.end());
      std::printf("copies %-36s n %4zu  median %.3f  p99 %.3f  max %.3f\n", name.c_str(), v.size(), v[v.size() / 2],
                  v[std::min(v.size() - 1, v.size() * 99 / 100)], v.back());
      for (int k = 0; k < 8; ++k) lost[k] += int(std::count_if(v.begin(), v.end(), [&](float x) { return x > cuts[k]; }));
    }
    for (int k = 0; k < 8; ++k) std::printf("limit %.1f: joined copies lost %d\n", cuts[k], lost[k]);
    for (size_t sc = 0; sc < scenes.size(); ++sc)
      for (size_t i = 0; i < scene_looks[sc].size(); ++i)
        for (size_t j = i + 1; j < scene_looks[sc].size(); ++j) {
          Match m;
          if (joined_match(scene_looks[sc][i], scene_looks[sc][j], m))
            std::printf("distinct joined: %-40s chroma %.3f local %.3f\n", (scenes[sc].how[i] + " / " + scenes[sc].how[j]).c_str(),
                        m.chroma, m.chroma_local);
        }
    return 0;
  }
  if (std::getenv("TRUTH_WHY")) {  // why copies of one family are missed: hash distance, then the match's measures
    const std::string fam = std::getenv("TRUTH_WHY");
    GroupSettings gs;
    for (const auto& c : copies) {
      if (sources[c.source].family != fam ||
          test::pair_joined(c.look, sources[c.source].look, gs, c.ps, sources[c.source].ps))
        continue;
      const Lookalike& a = sources[c.source].look;
      int best_t = 0, best_d = 65;
      for (int t = 0; t < kDihedralCount; ++t)
        if (hamming(a.phash[t], c.look.phash[0]) < best_d) { best_d = hamming(a.phash[t], c.look.phash[0]); best_t = t; }
      const cv::Size sa = sources[c.source].pixels.size();
      const MatchSettings ms = pair_settings(gs.match, sources[c.source].ps, c.ps, best_t);
      const Match m = match_thumbnails(a.thumb, best_t, c.look.thumb, ms);
      // The resampled comparison alone, when the pair has one.
      Match r;
      int kernel = -1;
      if (ms.resample.width > 0) {
        Thumbnail ta;
        turn_thumbnail(a.thumb, ta, best_t);
        MatchSettings own = ms;
        own.resample = {};
        own.min_correlation = ms.resample.min_correlation;
        const Thumbnail& large = ms.resample.on_a ? ta : c.look.thumb;
        const Thumbnail& small = ms.resample.on_a ? c.look.thumb : ta;
        for (int k = 0; k < kResampleKernels; ++k) {  // the best kernel by the match's own correlation
          Thumbnail rs;
          resample_thumbnail(large, ms.resample, ResampleKernel(k), rs);
          const Match mk = match_thumbnails(rs, 0, small, own);
          if (mk.correlation > r.correlation) r = mk, kernel = k;
        }
      }
      if (kinds[c.kind].jpeg_quality > 0 && sa.width <= 32 && sa.height <= 32) {
        Thumbnail ta, tj;
        turn_thumbnail(a.thumb, ta, best_t);
        jpeg_thumbnail(ta, c.size.width, c.size.height, kinds[c.kind].jpeg_quality, tj);
        const Match mj = match_thumbnails(tj, 0, c.look.thumb, ms);
        std::printf("   jpeg-simulated: corr %.5f joined %d blur %d local %.3f\n", mj.correlation, int(mj.joined), mj.blur_step, mj.local);
      }
      std::printf("why %-26s src %3zu hash %2d corr %.4f local %.3f chroma %.3f blur %d | resampled %.4f/%.5f kernel %d blur %d fit %d local %.3f\n",
                  kinds[c.kind].name.c_str(), c.source, best_d, m.correlation, m.local, m.chroma, m.blur_step, r.correlation,
                  ms.resample.min_correlation, kernel, r.blur_step, int(r.fitted), r.local);
    }
    return 0;
  }
  GroupSettings defaults;
  std::printf("== defaults\n");
  evaluate(defaults, true);
  if (std::getenv("TRUTH_QUICK")) return 0;
  std::printf("== tone-and-colour fit floor (1: off)\n");
  for (double f : {1.0, 0.99, 0.985, 0.98, 0.97, 0.95}) {
    GroupSettings gs;
    gs.match.fit_floor = f;
    std::printf("fit_floor %.3f: ", f);
    evaluate(gs, argc > 3);
  }
  std::printf("== correlation threshold\n");
  for (double c : {0.98, 0.985, 0.99, 0.992, 0.994, 0.996, 0.998}) {
    GroupSettings gs;
    gs.match.min_correlation = c;
    evaluate(gs, argc > 3);
  }
  std::printf("== trade-off\n");
  for (double l : {0.03, 0.045, 0.06, 0.09, 0.16})
    for (double c : {0.2, 0.35, 0.6, 10.0}) {
      GroupSettings gs;
      gs.match.max_local = l;
      gs.match.max_chroma = c;
      evaluate(gs, false);
    }
  return 0;
}
