// Class aliases and left-out classes (docs/labels.md, Merging and leaving out
// classes): the classes a run trains on, decided when placing, without touching
// the data set or the saved index (which keeps the labels as read, so `tamis
// split` can choose again).
//
// Contract of apply_class_map:
// - Aliases first: every image whose label is an alias's variant takes the
//   alias's class (an existing class or a new name). Then every image whose
//   (merged) label is excluded loses its label (label_of -1) and is marked in
//   `class_excluded`; the split leaves it out (`class-excluded` in the manifest).
// - names stays sorted bytewise and holds only classes that keep an image;
//   label_of is remapped to it.
// - The mapping lists every alias and exclusion with the images it moved or left
//   out (0 for a name no image has: a typo shows there, not silently).
// - Pure; an empty map changes nothing (applied false).
#pragma once

#include <cstdint>
#include <map>
#include <set>
#include <string>
#include <vector>

#include "tamis/relate/labels.h"

namespace tamis {

struct ClassMap {
  std::map<std::string, std::string> aliases;  // variant -> class
  std::set<std::string> excluded;              // classes left out (after aliases)
  bool empty() const { return aliases.empty() && excluded.empty(); }
};

// Throws std::invalid_argument naming the entry: an empty name, a variant mapped
// to itself, or a chain (a class that is itself a variant).
void validate_class_map(const ClassMap& map);

struct ClassMapping {
  bool applied = false;
  Labelling as_read;                 // the labels before the map (what the saved index keeps)
  std::vector<bool> class_excluded;  // per record
  struct Alias { std::string from, to; uint64_t images = 0; };
  struct Left { std::string label; uint64_t images = 0; };
  std::vector<Alias> aliases;        // in the map's order (by variant)
  std::vector<Left> excluded;        // by name
};

ClassMapping apply_class_map(Labelling& labels, const ClassMap& map);

}  // namespace tamis
