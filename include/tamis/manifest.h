// The manifest: one CSV row per image (never a mask), sorted by path bytewise.
//
// UTF-8, RFC 4180 quoting (a field holding a comma, a double quote, CR or LF is
// quoted, inner quotes doubled), CRLF line ends as RFC 4180 prescribes, and a
// header row. Columns, in order: path, label, split, group, width, height, mode,
// bit_depth, format, mask_path, flags, then reason, bytes, orientation, frames,
// content_hash (docs/outputs.md). Rendering only: computes nothing.
#pragma once

#include <ostream>
#include <string>
#include <string_view>
#include <vector>

#include "tamis/audit.h"

namespace tamis {

// Appends `field` to `out`, quoted as RFC 4180 requires.
void append_csv_field(std::string& out, std::string_view field);

// Per-record finding codes, ';'-joined and sorted, gathered from the findings' paths.
std::vector<std::string> flags_per_record(const AuditResult& result);

void write_manifest(std::ostream& os, const AuditResult& result);

}  // namespace tamis
