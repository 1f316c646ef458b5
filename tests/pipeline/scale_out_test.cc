// Scale-out (pipeline/scale_out.h): shards, parts, join slices, the merge.
// Truths constructed by the tests: a partition covers every entry once; a part
// read back equals what was written; damaged parts are refused; the union of
// the join's slices gives find_groups' groups (Fashion-MNIST, Debian
// dataset-fashion-mnist, Xiao, Rasul & Vollgraf 2017).
#include <catch2/catch.hpp>

#include <fstream>
#include <map>
#include <set>
#include <sstream>

#include <xxhash.h>

#include "support/fashion_mnist.h"
#include "support/planted.h"
#include "support/temp_tree.h"
#include "tamis/demo/demo.h"
#include "tamis/model/cbor_reader.h"
#include "tamis/model/record_codec.h"
#include "tamis/pipeline/scale_out.h"
#include "tamis/read/features.h"
#include "tamis/relate/lookalike_index.h"
#include "tamis/relate/screen_join.h"
#include "tamis/report/outputs.h"

using namespace tamis;
using tamis::test::TempDir;

namespace {

TreeSettings settings_for(const std::filesystem::path& root) {
  TreeSettings s;
  s.root = root;
  s.read.threads = 2;
  return s;
}

std::filesystem::path write_part_to(const std::filesystem::path& file, const ScanPart& p) {
  std::ofstream os(file, std::ios::binary);
  write_part(os, p);
  return file;
}

bool refused(const std::filesystem::path& file) {
  try {
    PartFile p(file);
    p.read_records();
    p.verify();
    std::vector<Thumbnail> t(p.thumbnails());
    if (!t.empty()) p.read_thumbnails(0, t.size(), t.data());
  } catch (const PartError&) {
    return true;
  }
  return false;
}

}  // namespace

TEST_CASE("shards: K/N parsed strictly, and the environment of Slurm arrays and Indexed Jobs", "[scale-out]") {
  CHECK(parse_shard("0/4").index == 0);
  CHECK(parse_shard("3/4").count == 4);
  for (const char* bad : {"4/4", "1/0", "-1/4", "1/", "/4", "a/b", "1/4x", "", "2", "1/2/3"})
    CHECK_THROWS_AS(parse_shard(bad), std::invalid_argument);
  auto env = [](std::map<std::string, std::string> vars) {
    return [vars](const char* name) -> const char* {
      auto it = vars.find(name);
      return it == vars.end() ? nullptr : it->second.c_str();
    };
  };
  CHECK_FALSE(shard_from_environment(env({}), 0).has_value());
  // sbatch --array=1-4: the task with id 3 is shard 2 of 4 (Slurm's variables, from its sbatch manual).
  auto s = shard_from_environment(env({{"SLURM_ARRAY_TASK_ID", "3"}, {"SLURM_ARRAY_TASK_COUNT", "4"},
                                       {"SLURM_ARRAY_TASK_MIN", "1"}, {"SLURM_ARRAY_TASK_MAX", "4"},
                                       {"SLURM_ARRAY_TASK_STEP", "1"}}),
                                  0);
  REQUIRE(s);
  CHECK(s->index == 2);
  CHECK(s->count == 4);
  // --array=0-6:2 is no plain range; a count that contradicts --shards is refused.
  CHECK_THROWS_AS(shard_from_environment(env({{"SLURM_ARRAY_TASK_ID", "2"}, {"SLURM_ARRAY_TASK_COUNT", "4"},
                                              {"SLURM_ARRAY_TASK_MIN", "0"}, {"SLURM_ARRAY_TASK_MAX", "6"},
                                              {"SLURM_ARRAY_TASK_STEP", "2"}}),
                                         0),
                  std::invalid_argument);
  CHECK_THROWS_AS(shard_from_environment(env({{"SLURM_ARRAY_TASK_ID", "0"}, {"SLURM_ARRAY_TASK_COUNT", "2"},
                                              {"SLURM_ARRAY_TASK_MIN", "0"}, {"SLURM_ARRAY_TASK_MAX", "1"}}),
                                         3),
                  std::invalid_argument);
  CHECK_THROWS_AS(shard_from_environment(env({{"SLURM_ARRAY_TASK_ID", "0"}}), 0), std::invalid_argument);
  // Kubernetes Indexed Job: JOB_COMPLETION_INDEX with the count given.
  s = shard_from_environment(env({{"JOB_COMPLETION_INDEX", "5"}}), 8);
  REQUIRE(s);
  CHECK(s->index == 5);
  CHECK_THROWS_AS(shard_from_environment(env({{"JOB_COMPLETION_INDEX", "5"}}), 0), std::invalid_argument);
  CHECK_THROWS_AS(shard_from_environment(env({{"JOB_COMPLETION_INDEX", "8"}}), 8), std::invalid_argument);
  CHECK_THROWS_AS(shard_from_environment(env({{"JOB_COMPLETION_INDEX", "x"}}), 8), std::invalid_argument);
}

TEST_CASE("shards: every entry of a walk falls in exactly one shard, whatever N", "[scale-out]") {
  WalkResult all;
  for (int i = 0; i < 500; ++i) all.files.push_back({"c" + std::to_string(i % 7) + "/f" + std::to_string(i) + ".png"});
  std::sort(all.files.begin(), all.files.end(), [](const WalkEntry& a, const WalkEntry& b) { return a.path < b.path; });
  for (int i = 0; i < 7; ++i) all.dirs.push_back("c" + std::to_string(i));
  all.links = {"c0/link", "c1/link"};
  for (uint32_t n : {1u, 2u, 3u, 4u, 7u, 64u}) {
    std::map<std::string, int> seen;
    std::vector<size_t> sizes;
    for (uint32_t k = 0; k < n; ++k) {
      WalkResult w = all;
      keep_shard(w, {k, n});
      CHECK(std::is_sorted(w.files.begin(), w.files.end(), [](const WalkEntry& a, const WalkEntry& b) { return a.path < b.path; }));
      for (const auto& e : w.files) ++seen[e.path];
      for (const auto& d : w.dirs) ++seen[d];
      for (const auto& l : w.links) ++seen[l];
      sizes.push_back(w.files.size());
    }
    CHECK(seen.size() == all.files.size() + all.dirs.size() + all.links.size());
    for (const auto& [path, times] : seen) CHECK(times == 1);
    // A file's shard depends only on its path: a walk with one file less keeps the others' shards.
    if (n == 4) {
      WalkResult less = all;
      less.files.erase(less.files.begin() + 17);
      keep_shard(less, {1, 4});
      WalkResult w = all;
      keep_shard(w, {1, 4});
      std::erase_if(w.files, [&](const WalkEntry& e) { return e.path == all.files[17].path; });
      CHECK(less.files.size() == w.files.size());
    }
  }
}

TEST_CASE("a part read back equals the scan that wrote it, and damaged, cut or foreign parts are refused", "[scale-out]") {
  TempDir t;
  write_demo(t / "demo");
  std::set<std::string> paths;
  size_t total = 0;
  for (uint32_t k = 0; k < 3; ++k) {
    ScanPart part = scan_tree(settings_for(t / "demo"), {k, 3});
    const auto file = write_part_to(t / ("p" + std::to_string(k)), part);
    PartFile back(file);
    back.verify();
    CHECK(back.info().shard.index == k);
    CHECK(back.info().root == part.root);
    CHECK(back.info().read_key == part.read_key);
    CHECK(back.info().walk.dirs == part.walk.dirs);
    const std::vector<FileRecord> records = back.read_records();
    REQUIRE(records.size() == part.records.size());
    size_t thumb = 0;
    for (size_t i = 0; i < part.records.size(); ++i) {
      CHECK(detail::record_to_json(records[i], true) == detail::record_to_json(part.records[i], true));
      paths.insert(part.records[i].path);
      if (!part.records[i].features.has_lookalike) continue;
      REQUIRE(thumb < back.thumbnails());
      CHECK(back.thumbnail_record(thumb) == i);
      Thumbnail a, b;
      part.thumbs.get(i, a);
      back.read_thumbnails(thumb, 1, &b);
      CHECK(a == b);
      ++thumb;
    }
    CHECK(thumb == back.thumbnails());
    // Every run of thumbnails read at once, gray ones (stored as their gray plane)
    // and colour ones (stored whole) mixed: the same as one at a time.
    size_t gray = 0;
    for (size_t first = 0; first < back.thumbnails(); ++first)
      for (size_t count = 1; first + count <= back.thumbnails(); count += 3) {
        std::vector<Thumbnail> run(count);
        back.read_thumbnails(first, count, run.data());
        for (size_t k = 0; k < count; ++k) {
          Thumbnail one;
          part.thumbs.get(back.thumbnail_record(first + k), one);
          CHECK(run[k] == one);
          if (count == 1) gray += neutral_chroma(one);
        }
      }
    INFO("shard " << k << ": " << gray << " gray thumbnails of " << back.thumbnails());
    CHECK(gray > 0);
    CHECK(gray < back.thumbnails());
    total += part.records.size();
  }
  CHECK(total == paths.size());
  CHECK(total == 256);  // the demo's files, each in one shard

  // Damage to the first part: cuts and flipped bits anywhere are refused, never read.
  const auto good = test::read_bytes(t / "p0");
  const size_t n = good.size();
  for (size_t cut : {size_t{0}, size_t{10}, size_t{63}, size_t{64}, n / 3, n / 2, n - 1200, n - 25, n - 1}) {
    test::write_bytes(t / "bad", std::vector<uint8_t>(good.begin(), good.begin() + static_cast<std::ptrdiff_t>(cut)));
    CHECK(refused(t / "bad"));
  }
  for (size_t at = 0; at < n; at += std::max<size_t>(1, n / 97)) {
    auto flipped = good;
    flipped[at] ^= static_cast<uint8_t>(1u << (at % 8));
    test::write_bytes(t / "bad", flipped);
    INFO("bit flipped at byte " << at << " of " << n);
    CHECK(refused(t / "bad"));
  }
  auto longer = good;
  longer.push_back(0);
  test::write_bytes(t / "bad", longer);
  CHECK(refused(t / "bad"));
  test::write_text(t / "bad", "not a part at all");
  CHECK(refused(t / "bad"));
}

TEST_CASE("merge refuses a missing, repeated or foreign shard and join outputs of other parts", "[scale-out]") {
  TempDir t;
  write_demo(t / "demo");
  std::vector<std::filesystem::path> files;
  for (uint32_t k = 0; k < 3; ++k) files.push_back(write_part_to(t / ("p" + std::to_string(k)), scan_tree(settings_for(t / "demo"), {k, 3})));
  CHECK_THROWS_AS(PartSet({files[0], files[2]}), MergeError);
  CHECK_THROWS_AS(PartSet({files[0], files[1], files[1], files[2]}), MergeError);
  CHECK_THROWS_AS(PartSet({}), MergeError);
  TreeSettings other = settings_for(t / "demo");
  other.read.decode.max_pixels = 1'000'000;
  const auto foreign = write_part_to(t / "q1", scan_tree(other, {1, 3}));
  CHECK_THROWS_AS(PartSet({files[0], foreign, files[2]}), MergeError);
  const auto four = write_part_to(t / "r1", scan_tree(settings_for(t / "demo"), {1, 4}));
  CHECK_THROWS_AS(PartSet({files[0], four, files[2]}), MergeError);
  // A join of these parts with other look-alike settings, or of other parts.
  PartSet set(files);
  TreeSettings s = settings_for(t / "demo");
  JoinSlice j = join_parts(set, s, {0, 1});
  TreeSettings wider = s;
  wider.groups.radius = 10;
  CHECK_THROWS_AS(merge_parts(PartSet(files), {j}, wider), MergeError);
  JoinSlice stale = j;
  stale.parts_key ^= 1;
  CHECK_THROWS_AS(merge_parts(PartSet(files), {stale}, s), MergeError);
  JoinSlice half = join_parts(set, s, {0, 2});
  CHECK_THROWS_AS(merge_parts(PartSet(files), {half}, s), MergeError);
  CHECK_THROWS_AS(merge_parts(PartSet(files), {half, half}, s), MergeError);
  CHECK_NOTHROW(merge_parts(PartSet(files), {j}, s));
}

TEST_CASE("Fashion-MNIST: the join's slices together give find_groups' groups exactly", "[scale-out][fashion-mnist]") {
  const auto root = test::fashion_mnist_tree();
  ScanPart whole = scan_tree(settings_for(root), {});
  GroupSettings gs;
  gs.threads = 2;
  const GroupResult expect = find_groups(whole.records, whole.thumbs, gs);
  REQUIRE(expect.groups.size() > 50);  // the set's own near-copies (docs/lookalikes.md)
  auto load = [&](const uint32_t* which, size_t count, Thumbnail* out) {
    for (size_t k = 0; k < count; ++k) whole.thumbs.get(which[k], out[k]);
  };
  for (uint32_t slices : {1u, 3u}) {
    // A small join budget: several batches of queries a slice, the same pairs.
    if (slices == 3) gs.join_memory_bytes = 1 << 20;
    LookalikeLinks all;
    for (uint32_t s = 0; s < slices; ++s) {
      LookalikeLinks one = join_lookalike_slice(whole.records, gs, s, slices, load);
      all.links.insert(all.links.end(), one.links.begin(), one.links.end());
      all.candidate_hits += one.candidate_hits;
    }
    const GroupResult got = groups_from_links(whole.records, all);
    INFO(slices << " slices");
    CHECK(got.candidate_hits == expect.candidate_hits);
    CHECK(got.confirmed_pairs == expect.confirmed_pairs);
    CHECK(got.exact_pairs == expect.exact_pairs);
    CHECK(got.group_of == expect.group_of);
    REQUIRE(got.groups.size() == expect.groups.size());
    for (size_t g = 0; g < got.groups.size(); ++g) {
      CHECK(got.groups[g].members == expect.groups[g].members);
      CHECK(got.groups[g].diameter == expect.groups[g].diameter);
      REQUIRE(got.groups[g].links.size() == expect.groups[g].links.size());
      for (size_t k = 0; k < got.groups[g].links.size(); ++k) {
        const GroupLink &x = got.groups[g].links[k], &y = expect.groups[g].links[k];
        CHECK(std::tie(x.a, x.b, x.turn, x.correlation, x.blur_step, x.blurred_a, x.fit_source) ==
              std::tie(y.a, y.b, y.turn, y.correlation, y.blur_step, y.blurred_a, y.fit_source));
      }
    }
  }
}

TEST_CASE("colour pictures: the join's slices give find_groups' groups, the value plane's key included", "[scale-out]") {
  // Photograph tiles (planted.h: Debian photographs) and their hue-turned and
  // desaturated copies: pairs that only the third candidate key (the value
  // plane's, match.h value_profile) gives, which each slice must find as the
  // whole join does.
  std::vector<Lookalike> looks;
  for (const auto& tile : test::photograph_tiles()) {
    looks.push_back(lookalike_features(tile));
    for (int degrees : {-30, 60}) looks.push_back(lookalike_features(test::hue_turned(tile, degrees)));
  }
  std::vector<FileRecord> records(looks.size());
  ThumbnailTable thumbs;
  thumbs.assign_all(looks.size());
  for (size_t i = 0; i < looks.size(); ++i) {
    char path[32];
    std::snprintf(path, sizeof path, "t/%04zu.png", i);
    records[i].path = path;
    records[i].kind = FileKind::image;
    records[i].features.has_lookalike = records[i].features.has_content_hash = true;
    records[i].features.content_hash = {i, 7};
    records[i].features.look = looks[i];
    thumbs.put(i, looks[i].thumb);
  }
  // Hits that only the value key gives (neither the hash nor the gray key).
  GroupSettings gs;
  gs.threads = 2;
  const int64_t thr2 = screen_threshold(gs.screen_radius);
  size_t value_only = 0;
  for (size_t i = 0; i < looks.size(); ++i)
    for (size_t j = 0; j < looks.size(); ++j)
      for (int t = 0; t < kDihedralCount && i != j; ++t) {
        const int64_t dv = screen_distance2(value_profile(looks[i].thumb), t, value_profile(looks[j].thumb));
        const int64_t dg = screen_distance2(match_profile(looks[i].thumb), t, match_profile(looks[j].thumb));
        value_only += dv >= 0 && dv <= thr2 && !(dg >= 0 && dg <= thr2) && hamming(looks[i].phash[t], looks[j].phash[0]) > gs.radius;
      }
  CHECK(value_only > 0);
  const GroupResult expect = find_groups(records, thumbs, gs);
  REQUIRE(expect.groups.size() > 20);
  auto load = [&](const uint32_t* which, size_t count, Thumbnail* out) {
    for (size_t k = 0; k < count; ++k) thumbs.get(which[k], out[k]);
  };
  for (uint32_t slices : {1u, 3u}) {
    LookalikeLinks all;
    for (uint32_t s = 0; s < slices; ++s) {
      LookalikeLinks one = join_lookalike_slice(records, gs, s, slices, load);
      all.links.insert(all.links.end(), one.links.begin(), one.links.end());
      all.candidate_hits += one.candidate_hits;
    }
    const GroupResult got = groups_from_links(records, all);
    INFO(slices << " slices, " << value_only << " hits by the value key alone");
    CHECK(got.candidate_hits == expect.candidate_hits);
    CHECK(got.confirmed_pairs == expect.confirmed_pairs);
    CHECK(got.group_of == expect.group_of);
  }
}

TEST_CASE("CBOR nested past the limit is an error, not a stack overflow (the index, parts, join outputs)", "[scale-out][cbor]") {
  // 200,000 nested one-element arrays (0x81, RFC 8949 major type 4, length 1) around a 0.
  std::vector<uint8_t> deep(200000, 0x81);
  deep.push_back(0x00);
  CHECK_THROWS_AS(parse_cbor(deep.data(), deep.data() + deep.size()), std::runtime_error);
  std::vector<uint8_t> fine = {0x82, 0x81, 0x01, 0x02};  // [[1], 2]
  CHECK(parse_cbor(fine.data(), fine.data() + fine.size()) == nlohmann::json::parse("[[1], 2]"));
  // A join output forged with a valid checksum over such a body is refused.
  TempDir t;
  std::vector<uint8_t> file = {0x89, 't', 'a', 'm', 'i', 's', '-', 'j', 'o', 'i', 'n', '\r', '\n', 0x1a, '\n', 0};
  const uint64_t sum = XXH3_64bits(deep.data(), deep.size());
  for (int k = 0; k < 8; ++k) file.push_back(static_cast<uint8_t>(sum >> (8 * k)));
  file.insert(file.end(), deep.begin(), deep.end());
  test::write_bytes(t / "deep.join", file);
  CHECK_THROWS_AS(load_join(t / "deep.join"), JoinFileError);
}
