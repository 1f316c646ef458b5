// Labels: which class each image belongs to, read from the folder layout.
//
// Rule (docs/labels.md): the label of an image is the name of the first folder
// below ROOT on its path, so ROOT/oak/batch2/x.jpg is "oak". When the tree is
// already split (every top-level folder that holds images is named like a split:
// train/training, val/valid/validation/dev, test/testing, in any case, and one
// of them is a train folder), the split folder is skipped and its name kept as
// the image's given split: ROOT/train/oak/x.jpg is "oak" in "train".
// Images directly in ROOT (or directly in a split folder) have no label.
// Pure function of the paths; deterministic.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "tamis/model/record.h"

namespace tamis {

enum class SplitName : int8_t { none = -1, train = 0, val = 1, test = 2 };
std::string_view to_string(SplitName s);

// The split a folder name stands for, or none ("Train", "validation", "TEST").
SplitName split_from_folder(std::string_view name);

struct Labelling {
  bool pre_split = false;                 // the tree is ROOT/<split>/<class>/...
  std::vector<std::string> names;         // distinct labels, sorted bytewise
  std::vector<int32_t> label_of;          // per record: index into names, or -1
  std::vector<SplitName> given_split;     // per record: the split folder, when pre_split
};

// Labels every record (only images get one; others get -1). `layout_roots` are
// top-level folders that hold photographs beside a parallel mask tree
// (ROOT/images/<class>/... beside ROOT/masks/<class>/...): below them the label
// is the next folder.
Labelling assign_labels(const std::vector<FileRecord>& records, const std::vector<std::string>& layout_roots = {});

}  // namespace tamis
