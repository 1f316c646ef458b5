// Leaving images out of the split (place/leave_out.h): the truth is constructed
// here, record by record.
#include <catch2/catch.hpp>

#include "tamis/place/leave_out.h"

using namespace tamis;

namespace {
FileRecord image(const char* path, uint32_t w, uint32_t h, FileKind kind = FileKind::image) {
  FileRecord r;
  r.path = path;
  r.kind = kind;
  r.probe.width = w;
  r.probe.height = h;
  return r;
}
}  // namespace

TEST_CASE("images named by chosen findings, or whose masks are, and extra group members are left out", "[split][leave-out]") {
  std::vector<FileRecord> records = {image("a/1.png", 10, 10), image("a/2.png", 20, 20), image("a/3.png", 20, 20),
                                     image("a/3_mask.png", 20, 20, FileKind::mask), image("b/1.png", 8, 8),
                                     image("b/2.png", 0, 0, FileKind::unreadable), image("b/3.png", 30, 30),
                                     image("b/4.png", 30, 30)};
  Labelling labels;
  labels.names = {"a", "b"};
  labels.label_of = {0, 0, 0, -1, 1, -1, 1, 1};
  MaskPairing masks;
  masks.mask_of = {-1, -1, 3, -1, -1, -1, -1, -1};
  GroupResult groups;
  groups.groups.resize(2);
  groups.groups[0].members = {0, 1, 2};
  groups.groups[1].members = {5, 6, 7};  // an unreadable member takes no part; a tie keeps the first path
  std::vector<Finding> findings(3);
  findings[0].code = "mask-empty";
  findings[0].paths = {"a/3_mask.png"};
  findings[1].code = "label-conflict";
  findings[1].paths = {"b/1.png"};
  findings[2].code = "tiny-image";
  findings[2].paths = {"a/1.png"};

  SplitSettings s;
  CHECK(leave_out(records, labels, masks, groups, findings, s) == std::vector<Exclusion>(8, Exclusion::none));

  s.exclude_flagged = {"mask-empty"};
  s.one_per_group = true;
  using E = Exclusion;
  // a/3.png: its mask is empty. Group 1: a/1.png (100 px) and a/2.png (400 px) are
  // left: a/2.png is kept. Group 2: b/3.png and b/4.png tie: b/3.png is kept.
  CHECK(leave_out(records, labels, masks, groups, findings, s) ==
        std::vector<E>{E::one_per_group, E::none, E::flagged, E::none, E::none, E::none, E::none, E::one_per_group});

  s.exclude_flagged = {"label-conflict", "tiny-image"};
  s.one_per_group = false;
  CHECK(leave_out(records, labels, masks, groups, findings, s) ==
        std::vector<E>{E::flagged, E::none, E::none, E::none, E::flagged, E::none, E::none, E::none});
}

TEST_CASE("only codes whose findings exist before the split can leave images out", "[split][leave-out]") {
  CHECK(excludable_code("label-conflict"));
  CHECK(excludable_code("mask-size-mismatch"));
  CHECK_FALSE(excludable_code("class-capped"));         // made by the split
  CHECK_FALSE(excludable_code("split-without-class"));  // made by the split
  CHECK_FALSE(excludable_code("too-many-unreadable"));  // names no image
  CHECK_FALSE(excludable_code("no-such-code"));
}
