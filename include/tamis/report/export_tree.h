// `tamis export`: an audit's (or a split's) outputs laid out for loaders that
// read folders or lists (docs/export.md).
//
// Contract:
// - Reads DIR/manifest.csv and DIR/report.json only when DIR/tamis-set.json
//   says they are one whole set (sizes and XXH3-64 match); ROOT comes from
//   report.json (`root`).
// - Writes TREE/<split>/<label>/<name> for every train, val and test row (never
//   an excluded one): a symbolic link to the absolute path of ROOT's file, a hard
//   link, or a copy of its bytes; the row's mask, if any, at
//   TREE/masks/<split>/<label>/<the image entry's stem><the mask's extension>;
//   TREE/<split>.txt, the absolute paths of that split's entries, one a line
//   (sorted as the manifest is; a name holding a line break is left out of the
//   list and counted); TREE/tamis-export.json, what was exported from where.
// - <name> is the image's file name; where names would collide in one
//   <split>/<label> folder, each colliding one becomes <stem>~<16 hex of the
//   XXH3-64 of its ROOT path><extension>: distinct, and the same whatever else is
//   in the tree.
// - The tree is built in a hidden sibling folder and renamed into place, so TREE
//   is whole or absent (an earlier tree is replaced only once the new one is
//   complete); a build that fails leaves nothing (a killed one a hidden sibling
//   that the next export to TREE removes).
// - Refuses (ExportError, exit 2): TREE that is ROOT or inside it (the output
//   layer's guard), TREE that holds ROOT or DIR, TREE that is not empty unless it
//   holds an earlier export and `replace` is set, a manifest name that leaves
//   its folder (absolute, "..").
// - Fails (ExportError, exit 3): DIR not a whole set, a listed file missing, a
//   hard link across file systems (never a silent copy), any write error.
#pragma once

#include <array>
#include <cstdint>
#include <filesystem>
#include <stdexcept>
#include <string>

namespace tamis {

enum class ExportMode { symlink, hardlink, copy };

struct ExportSettings {
  std::filesystem::path outputs;  // DIR: an audit's or a split's --out
  std::filesystem::path tree;     // TREE
  ExportMode mode = ExportMode::symlink;
  bool replace = false;  // replace an earlier export in TREE
};

struct ExportResult {
  std::filesystem::path root, tree;       // both absolute
  std::array<uint64_t, 3> images{};       // per split: train, val, test
  uint64_t masks = 0;
  uint64_t renamed = 0;                   // entries whose names were made distinct
  uint64_t unlisted = 0;                  // entries left out of the list files (a line break in the name)
  bool replaced = false;                  // an earlier export was replaced
};

struct ExportError : std::runtime_error {
  ExportError(int status, const std::string& what) : std::runtime_error(what), exit_status(status) {}
  int exit_status;  // 2: refused before anything was written; 3: could not be done
};

// The name of the marker file an export writes into TREE.
inline constexpr const char* kExportMarker = "tamis-export.json";

ExportResult export_tree(const ExportSettings& settings);

const char* to_string(ExportMode m);

}  // namespace tamis
