// The audit on Fashion-MNIST (Xiao, Rasul & Vollgraf 2017, arXiv:1708.07747; Debian
// dataset-fashion-mnist): 70,000 28x28 8-bit grayscale images, 10 classes of 7,000
// (60,000 train + 10,000 test, 6,000 + 1,000 per class, as the paper states).
#include <catch2/catch.hpp>

#include <sstream>

#include "support/fashion_mnist.h"
#include "support/temp_tree.h"
#include "tamis/pipeline/audit.h"
#include "tamis/report/manifest.h"

using namespace tamis;

TEST_CASE("Fashion-MNIST tree: 10 classes of 7,000, all 28x28 gray 8-bit PNG", "[fashion-mnist][audit]") {
  auto root = test::fashion_mnist_tree();
  AuditSettings s;
  s.root = root;
  AuditResult r = run_audit(s);
  CHECK(r.totals.files_seen == 70000);
  CHECK(r.totals.images == 70000);
  CHECK(r.totals.unreadable == 0);
  CHECK(r.totals.ignored == 0);
  REQUIRE(r.labels.names.size() == 10);
  std::vector<size_t> per_class(10, 0);
  size_t odd = 0;
  for (size_t i = 0; i < r.records.size(); ++i) {
    const auto& p = r.records[i].probe;
    if (p.format != Format::png || p.width != 28 || p.height != 28 || p.mode != ColorMode::gray || p.bit_depth != 8)
      ++odd;
    ++per_class.at(static_cast<size_t>(r.labels.label_of[i]));
  }
  CHECK(odd == 0);
  CHECK(per_class == std::vector<size_t>(10, 7000));

  // Largest remainder at 70/15/15 on 7,000: exactly 4900/1050/1050 in every class.
  std::vector<std::array<size_t, 3>> counts(10);
  for (size_t i = 0; i < r.records.size(); ++i) {
    REQUIRE(r.split.placement[i] != Placement::excluded);
    ++counts[static_cast<size_t>(r.labels.label_of[i])][static_cast<size_t>(r.split.placement[i])];
  }
  for (const auto& c : counts) CHECK(c == std::array<size_t, 3>{4900, 1050, 1050});

  // The same audit with every thumbnail in a scratch file (written a window of
  // 16,384 records at a time, read back in batches for the confirmation): the
  // same links, measured the same, and the same manifest. Truth: the run above.
  test::TempDir scratch;
  s.read.thumbnail_memory_bytes = 0;
  s.read.scratch_dir = scratch.path();
  AuditResult q = run_audit(s);
  CHECK(q.groups.confirmed_pairs == r.groups.confirmed_pairs);
  CHECK(q.groups.candidate_hits == r.groups.candidate_hits);
  REQUIRE(q.groups.groups.size() == r.groups.groups.size());
  for (size_t g = 0; g < r.groups.groups.size(); ++g) {
    CHECK(q.groups.groups[g].members == r.groups.groups[g].members);
    REQUIRE(q.groups.groups[g].links.size() == r.groups.groups[g].links.size());
    for (size_t k = 0; k < r.groups.groups[g].links.size(); ++k) {
      const GroupLink &x = r.groups.groups[g].links[k], &y = q.groups.groups[g].links[k];
      CHECK((x.a == y.a && x.b == y.b && x.turn == y.turn && x.correlation == y.correlation &&
             x.blur_step == y.blur_step && x.blurred_a == y.blurred_a && x.fit_source == y.fit_source));
    }
  }
  std::ostringstream a, b;
  write_manifest(a, r);
  write_manifest(b, q);
  CHECK(a.str() == b.str());
}
