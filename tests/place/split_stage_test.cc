// The split stage in the pipeline: seeds, stability, keeping, caps, folds,
// pre-split trees, and re-splitting from the saved index.
#include <catch2/catch.hpp>

#include <map>
#include <set>
#include <sstream>

#include <opencv2/imgcodecs.hpp>

#include "support/fashion_mnist.h"
#include "support/temp_tree.h"
#include "tamis/base/random.h"
#include "tamis/demo/demo.h"
#include "tamis/pipeline/audit.h"
#include "tamis/place/manifest_reader.h"
#include "tamis/report/index_file.h"
#include "tamis/report/manifest.h"
#include "tamis/report/report_json.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {
std::string manifest_text(const AuditResult& r) {
  std::ostringstream os;
  write_manifest(os, r);
  return os.str();
}

// A tree of `per_class` distinct noise images (seeded) in each of `classes` folders,
// plus pairs of look-alike copies so that groups exist.
void noise_tree(const fs::path& root, int classes, int per_class, uint64_t seed, int first_index = 0) {
  SplitMix64 rng(seed);
  for (int c = 0; c < classes; ++c)
    for (int i = first_index; i < first_index + per_class; ++i) {
      cv::Mat m(24, 24, CV_8UC1);
      for (auto it = m.begin<uint8_t>(); it != m.end<uint8_t>(); ++it) *it = static_cast<uint8_t>(rng.below(256));
      std::vector<uchar> png;
      cv::imencode(".png", m, png);
      test::write_bytes(root / ("class" + std::to_string(c)) / ("img" + std::to_string(i) + ".png"),
                        std::vector<uint8_t>(png.begin(), png.end()));
      if (i % 10 == 3) {  // a mirrored copy: the two must stay together
        cv::Mat f;
        cv::flip(m, f, 1);
        cv::imencode(".png", f, png);
        test::write_bytes(root / ("class" + std::to_string(c)) / ("img" + std::to_string(i) + "_mirror.png"),
                          std::vector<uint8_t>(png.begin(), png.end()));
      }
    }
}

std::map<std::string, Placement> placements(const AuditResult& r) {
  std::map<std::string, Placement> out;
  for (size_t i = 0; i < r.records.size(); ++i)
    if (is_manifest_row(r.records[i])) out[r.records[i].path] = r.split.placement[i];
  return out;
}

void check_groups_whole(const AuditResult& r) {
  for (const auto& g : r.groups.groups) {
    std::set<std::pair<int, int>> seen;
    for (uint32_t m : g.members) seen.insert({int(r.split.placement[m]), r.split.fold[m]});
    CHECK(seen.size() == 1);
  }
}
}  // namespace

TEST_CASE("Fashion-MNIST: split counts do not depend on the seed, assignments do", "[split][fashion-mnist]") {
  AuditSettings s;
  s.root = test::fashion_mnist_tree();
  AuditIndex index = read_tree(s);
  std::vector<std::vector<Placement>> runs;
  for (uint64_t seed : {1ULL, 2ULL, 12345ULL}) {
    SplitSettings sp;
    sp.seed = seed;
    AuditResult r = place(index, sp);
    std::vector<std::array<size_t, 3>> counts(10);
    for (size_t i = 0; i < r.records.size(); ++i)
      if (r.split.placement[i] != Placement::excluded)
        ++counts[static_cast<size_t>(r.labels.label_of[i])][static_cast<size_t>(r.split.placement[i])];
    // Groups (2-5 images here) are placed largest first, so the singletons placed
    // last still meet the largest-remainder targets exactly.
    for (const auto& c : counts) CHECK(c == std::array<size_t, 3>{4900, 1050, 1050});
    check_groups_whole(r);
    runs.push_back(r.split.placement);
  }
  size_t moved = 0;
  for (size_t i = 0; i < runs[0].size(); ++i) moved += runs[0][i] != runs[1][i];
  CHECK(moved > 10000);  // another seed places many files differently
}

TEST_CASE("a copy of the tree created in reverse order gives the same manifest", "[split][determinism]") {
  test::TempDir a, b;
  write_demo(a.path());
  std::vector<fs::path> files;
  for (const auto& e : fs::recursive_directory_iterator(a.path()))
    if (e.is_regular_file()) files.push_back(fs::relative(e.path(), a.path()));
  std::sort(files.rbegin(), files.rend());
  for (const auto& f : files) {
    fs::create_directories((b.path() / f).parent_path());
    fs::copy_file(a.path() / f, b.path() / f);
  }
  AuditSettings sa, sb;
  sa.root = a.path();
  sb.root = b.path();
  sb.read.threads = 1;
  CHECK(manifest_text(run_audit(sa)) == manifest_text(run_audit(sb)));
}

TEST_CASE("stable split: adding 10% new files moves no earlier file", "[split][stable]") {
  test::TempDir t;
  noise_tree(t.path(), 4, 100, 7);
  AuditSettings s;
  s.root = t.path();
  s.split.method = SplitMethod::stable;
  auto before = placements(run_audit(s));
  noise_tree(t.path(), 4, 10, 8, 100);  // 10% more, new names
  AuditResult after_r = run_audit(s);
  auto after = placements(after_r);
  REQUIRE(after.size() > before.size());
  size_t moved = 0;
  for (const auto& [path, p] : before) moved += after.at(path) != p;
  CHECK(moved == 0);
  check_groups_whole(after_r);
  // Shares are right on average (binomial spread): train 70% +- 6 points over ~450 items.
  size_t train = 0;
  for (const auto& [path, p] : after) train += p == Placement::train;
  CHECK(std::abs(double(train) / after.size() - 0.70) < 0.06);
}

TEST_CASE("keeping a previous manifest: earlier files stay, new files fill the targets", "[split][keep]") {
  test::TempDir t;
  noise_tree(t.path(), 3, 100, 11);
  AuditSettings s;
  s.root = t.path();
  AuditResult first = run_audit(s);
  std::istringstream csv(manifest_text(first));
  KeepMap keep = read_manifest_splits(csv);
  REQUIRE(keep.size() == placements(first).size());
  noise_tree(t.path(), 3, 20, 12, 100);
  SplitSettings sp;
  sp.seed = 99;  // even another seed keeps what was placed
  AuditResult second = place(read_tree(s), sp, &keep);
  auto before = placements(first);
  auto after = placements(second);
  for (const auto& [path, p] : before) CHECK(after.at(path) == p);
  CHECK(second.split.kept == before.size());
  check_groups_whole(second);
  // New files are placed towards the targets over old + new.
  for (size_t c = 0; c < 3; ++c) {
    std::array<size_t, 3> n{};
    size_t total = 0;
    for (size_t i = 0; i < second.records.size(); ++i)
      if (second.labels.label_of[i] == int32_t(c) && second.split.placement[i] != Placement::excluded) {
        ++n[static_cast<size_t>(second.split.placement[i])];
        ++total;
      }
    auto target = largest_remainder(total, sp.percent);
    for (int k = 0; k < 3; ++k) CHECK(std::abs(int64_t(n[k]) - int64_t(target[k])) <= 2);
  }
}

TEST_CASE("per-class cap keeps at most N images a class, groups whole", "[split][cap]") {
  test::TempDir t;
  noise_tree(t.path(), 3, 50, 21);
  AuditSettings s;
  s.root = t.path();
  s.split.per_class = 20;
  AuditResult r = run_audit(s);
  std::vector<size_t> placed(3, 0), capped(3, 0);
  for (size_t i = 0; i < r.records.size(); ++i) {
    if (r.labels.label_of[i] < 0) continue;
    if (r.split.placement[i] != Placement::excluded) ++placed[static_cast<size_t>(r.labels.label_of[i])];
    if (r.split.why[i] == Exclusion::capped) ++capped[static_cast<size_t>(r.labels.label_of[i])];
  }
  for (size_t c = 0; c < 3; ++c) {
    CHECK(placed[c] <= 20);
    CHECK(placed[c] >= 19);  // whole groups of 2 may leave one slot empty
    CHECK(placed[c] + capped[c] == 55);
  }
  for (const auto& g : r.groups.groups) {
    std::set<bool> in;
    for (uint32_t m : g.members) in.insert(r.split.placement[m] == Placement::excluded);
    CHECK(in.size() == 1);
  }
  CHECK(std::count_if(r.findings.begin(), r.findings.end(), [](const Finding& f) { return f.code == "class-capped"; }) == 3);
}

TEST_CASE("folds: every train/val image in one fold, groups whole, folds balanced per class", "[split][folds]") {
  test::TempDir t;
  noise_tree(t.path(), 3, 60, 31);
  AuditSettings s;
  s.root = t.path();
  s.split.folds = 5;
  AuditResult r = run_audit(s);
  check_groups_whole(r);
  std::vector<std::vector<size_t>> per(3, std::vector<size_t>(5, 0));
  for (size_t i = 0; i < r.records.size(); ++i) {
    if (r.split.placement[i] == Placement::test || r.split.placement[i] == Placement::excluded) {
      CHECK(r.split.fold[i] == -1);
      continue;
    }
    REQUIRE(r.split.fold[i] >= 0);
    ++per[static_cast<size_t>(r.labels.label_of[i])][static_cast<size_t>(r.split.fold[i])];
  }
  for (const auto& f : per) CHECK(*std::max_element(f.begin(), f.end()) - *std::min_element(f.begin(), f.end()) <= 2);
}

TEST_CASE("a pre-split tree keeps its split unless asked to re-split", "[split][pre-split]") {
  test::TempDir t;
  noise_tree(t / "train", 2, 30, 41);
  noise_tree(t / "test", 2, 10, 42, 500);
  AuditSettings s;
  s.root = t.path();
  AuditResult kept = run_audit(s);
  REQUIRE(kept.labels.pre_split);
  for (size_t i = 0; i < kept.records.size(); ++i) {
    if (!is_manifest_row(kept.records[i])) continue;
    Placement want = kept.records[i].path.rfind("train/", 0) == 0 ? Placement::train : Placement::test;
    CHECK(kept.split.placement[i] == want);
  }
  s.split.resplit = true;
  AuditResult fresh = run_audit(s);
  size_t val = 0;
  for (auto p : fresh.split.placement) val += p == Placement::val;
  CHECK(val > 0);  // a new 70/15/15 split was drawn
}

TEST_CASE("re-splitting from the saved index reproduces the audit's outputs byte for byte", "[split][index]") {
  test::TempDir t, out;
  write_demo(t.path());
  AuditSettings s;
  s.root = t.path();
  s.split.seed = 5;
  s.split.folds = 3;
  AuditResult r = run_audit(s);
  save_index(out / "index.cbor", r);
  AuditResult again = place(load_index(out / "index.cbor"), s.split);
  CHECK(manifest_text(again) == manifest_text(r));
  CHECK(dump_json(build_report(again)) == dump_json(build_report(r)));
}

TEST_CASE("a damaged or foreign index is refused with a message, never half read", "[split][index][fault]") {
  test::TempDir t, out;
  write_demo(t.path());
  AuditSettings s;
  s.root = t.path();
  AuditResult r = run_audit(s);
  save_index(out / "index.cbor", r);
  auto good = test::read_bytes(out / "index.cbor");
  test::write_text(out / "garbage.cbor", "this is not an index");
  CHECK_THROWS_AS(load_index(out / "garbage.cbor"), std::runtime_error);
  for (size_t cut : {size_t{0}, size_t{10}, good.size() / 2, good.size() - 1}) {
    test::write_bytes(out / "cut.cbor", std::vector<uint8_t>(good.begin(), good.begin() + static_cast<long>(cut)));
    CHECK_THROWS_AS(load_index(out / "cut.cbor"), std::runtime_error);
  }
  CHECK_THROWS_AS(load_index(out / "missing.cbor"), std::runtime_error);
  // One bit flipped anywhere (400 places spread over the file, every bit of a
  // byte in turn) is refused: the checksum covers every byte.
  size_t refused = 0, tried = 0;
  for (size_t k = 0; k < 400; ++k) {
    auto bytes = good;
    const size_t at = k * (bytes.size() - 1) / 399;
    bytes[at] ^= static_cast<uint8_t>(1u << (k % 8));
    test::write_bytes(out / "flipped.cbor", bytes);
    ++tried;
    try {
      load_index(out / "flipped.cbor");
    } catch (const std::runtime_error&) {
      ++refused;
    }
  }
  CHECK(refused == tried);
  test::write_bytes(out / "good.cbor", good);
  CHECK_NOTHROW(load_index(out / "good.cbor"));
}

TEST_CASE("the manifest reader takes RFC 4180 quoting, any column order and CRLF or LF", "[manifest][keep]") {
  std::istringstream csv(
      "split,extra,path\r\n"
      "train,x,\"a,b/c.png\"\r\n"
      "test,\"multi\nline\",\"q\"\"uote/d.png\"\n"
      "excluded,,e/f.png\r\n"
      "val,,\"new\r\nline/g.png\"");
  KeepMap k = read_manifest_splits(csv);
  CHECK(k.size() == 3);
  CHECK(k.at("a,b/c.png") == Placement::train);
  CHECK(k.at("q\"uote/d.png") == Placement::test);
  CHECK(k.at("new\r\nline/g.png") == Placement::val);
  std::istringstream no_split("path,label\r\na.png,x\r\n");
  CHECK_THROWS_AS(read_manifest_splits(no_split), std::runtime_error);
  std::istringstream open_quote("path,split\r\n\"a.png,train\r\n");
  CHECK_THROWS_AS(read_manifest_splits(open_quote), std::runtime_error);
  // A file cut off mid-row, or a split column that holds something else (labels,
  // another spelling), is refused rather than silently keeping part of it.
  std::istringstream cut("path,label,split\na.png,x,train\nb.png,x");
  CHECK_THROWS_AS(read_manifest_splits(cut), std::runtime_error);
  std::istringstream upper("path,split\na.png,TRAIN\n");
  CHECK_THROWS_AS(read_manifest_splits(upper), std::runtime_error);
  std::istringstream labels("path,split\na.png,gingham\n");
  CHECK_THROWS_AS(read_manifest_splits(labels), std::runtime_error);
  std::istringstream blank_lines("path,split\na.png,train\n\nb.png,\n");
  CHECK(read_manifest_splits(blank_lines).size() == 1);
}
