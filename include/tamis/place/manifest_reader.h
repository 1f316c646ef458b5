// Reading a manifest back (docs/outputs.md), for --keep and for a baseline's
// file list: the writer is the report layer's (report/manifest.h); the reader is
// the placing layer's, which uses it. Bounds-checked: any bytes give a result or
// a std::runtime_error naming the line.
#pragma once

#include <istream>
#include <string>
#include <vector>

#include "tamis/place/split.h"

namespace tamis {

// Reads the path and split columns of a manifest (RFC 4180, any column order,
// header row required; escaped paths unescaped) into a map, for --keep. Rows whose split is not train,
// val or test are skipped. Throws std::runtime_error naming the line when the
// file is not a manifest (no path or split column, an unterminated quote).
KeepMap read_manifest_splits(std::istream& is);

// The path column of a manifest, in file order (same rules as above).
std::vector<std::string> read_manifest_paths(std::istream& is);

// A manifest row as `tamis export` needs it: names as bytes (unescaped where
// name_escape says percent), the split (excluded for excluded or empty).
struct ManifestRow {
  std::string path, label, mask_path;
  Placement split = Placement::excluded;
};

// Every row, in file order. Throws std::runtime_error naming the record when
// the header lacks path, label, split or mask_path, a row has another field
// count than the header (cut off or malformed), or a split or escape is unknown.
std::vector<ManifestRow> read_manifest_rows(std::istream& is);

}  // namespace tamis
