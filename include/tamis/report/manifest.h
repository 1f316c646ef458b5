// The manifest: one CSV row per image (never a mask), sorted by path bytewise.
//
// UTF-8, RFC 4180 quoting (a field holding a comma, a double quote, CR or LF is
// quoted, inner quotes doubled), LF line ends (a reader of RFC 4180 takes them;
// no stray CR for shell tools), and a header row. Columns, in order: path,
// label, split, group, width, height, color_mode, bit_depth, format, mask_path,
// finding_codes (place/record_flags.h), then reason, bytes, orientation, frames,
// content_hash, fold, brightness, contrast, entropy, sharpness, name_escape,
// exclusion (docs/outputs.md). A row whose path, label or mask path is not valid UTF-8
// writes those three in text.h's percent escape and "percent" in name_escape, so
// that the file is always UTF-8 and the names' bytes can be recovered.
// Rendering only: computes nothing.
#pragma once

#include <ostream>
#include <string>
#include <string_view>
#include <vector>

#include "tamis/pipeline/audit.h"

namespace tamis {

// Appends `field` to `out`, quoted as RFC 4180 requires.
void append_csv_field(std::string& out, std::string_view field);

void write_manifest(std::ostream& os, const AuditResult& result);

}  // namespace tamis
