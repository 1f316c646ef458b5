// The audit on Fashion-MNIST (Xiao, Rasul & Vollgraf 2017, arXiv:1708.07747; Debian
// dataset-fashion-mnist): 70,000 28x28 8-bit grayscale images, 10 classes of 7,000
// (60,000 train + 10,000 test, 6,000 + 1,000 per class, as the paper states).
#include <catch2/catch.hpp>

#include "support/fashion_mnist.h"
#include "tamis/pipeline/audit.h"

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
}
