#include "tamis/report/manifest.h"

#include <algorithm>
#include <charconv>
#include <istream>
#include <stdexcept>
#include <string_view>

#include "tamis/base/text.h"
#include "tamis/place/record_flags.h"

namespace tamis {

void append_csv_field(std::string& out, std::string_view field) {
  bool quote = field.find_first_of(",\"\r\n") != std::string_view::npos;
  if (!quote) {
    out.append(field);
    return;
  }
  out.push_back('"');
  for (char c : field) {
    if (c == '"') out.push_back('"');
    out.push_back(c);
  }
  out.push_back('"');
}

namespace {
// Why a row is excluded (empty when it is placed): docs/outputs.md, `exclusion`.
std::string exclusion_of(const AuditResult& r, size_t i, std::string_view codes) {
  if (r.split.placement[i] != Placement::excluded) return {};
  const Exclusion why = i < r.split.why.size() ? r.split.why[i] : Exclusion::none;
  if (why == Exclusion::capped) return "per-class";
  if (why == Exclusion::one_per_group) return "one-per-group";
  if (why == Exclusion::class_excluded) return "class-excluded";
  if (why == Exclusion::flagged) {
    std::string out = "flagged:";
    const auto& chosen = r.placed.split.exclude_flagged;
    size_t start = 0, kept = 0;
    while (start <= codes.size()) {
      size_t end = codes.find(';', start);
      if (end == std::string_view::npos) end = codes.size();
      const std::string_view code = codes.substr(start, end - start);
      if (std::binary_search(chosen.begin(), chosen.end(), code)) {
        if (kept++) out.push_back(';');
        out.append(code);
      }
      start = end + 1;
    }
    return out;
  }
  if (r.records[i].kind != FileKind::image) return "unreadable";
  if (r.labels.label_of[i] < 0) return "no-class";
  if (r.labels.pre_split && !r.placed.split.resplit && r.labels.given_split[i] == SplitName::none) return "no-split-folder";
  return "not-placed";
}
}  // namespace

void write_manifest(std::ostream& os, const AuditResult& r) {
  // color_mode and finding_codes: not the names of pandas DataFrame attributes
  // (df.mode and df.flags are methods, not these columns); docs/outputs.md.
  static const char* kHeader[] = {"path", "label", "split", "group", "width", "height", "color_mode", "bit_depth",
                                  "format", "mask_path", "finding_codes", "reason", "bytes", "orientation", "frames",
                                  "content_hash", "fold", "brightness", "contrast", "entropy", "sharpness",
                                  "name_escape", "exclusion"};
  std::string line;
  for (size_t c = 0; c < std::size(kHeader); ++c) {
    if (c) line.push_back(',');
    line.append(kHeader[c]);
  }
  line.push_back('\n');  // LF line ends: no stray CR in the last column for shell tools
  os << line;
  const RecordFlags flags = record_flags(r.records, r.masks, r.findings);
  size_t next_flag = 0;  // flags.pairs are in record order
  std::string record_codes;
  for (size_t i = 0; i < r.records.size(); ++i) {
    record_codes.clear();
    for (; next_flag < flags.pairs.size() && flags.pairs[next_flag].first == i; ++next_flag) {
      if (!record_codes.empty()) record_codes.push_back(';');
      record_codes.append(flags.codes[flags.pairs[next_flag].second]);
    }
    const FileRecord& rec = r.records[i];
    if (!is_manifest_row(rec)) continue;
    line.clear();
    auto field = [&](std::string_view v) {
      append_csv_field(line, v);
      line.push_back(',');
    };
    bool readable = rec.kind == FileKind::image;
    bool probed = rec.probe.format != Format::unknown;
    // Names are bytes; a row whose path, label or mask path is not UTF-8 writes
    // all three in the percent escape (text.h) and says so in name_escape.
    // A row of a left-out class shows the class it was read with.
    const bool left_class = r.class_mapping.applied && r.class_mapping.class_excluded[i];
    const std::string_view label =
        r.labels.label_of[i] >= 0 ? std::string_view(r.labels.names[r.labels.label_of[i]])
        : left_class ? std::string_view(r.class_mapping.as_read.names[r.class_mapping.as_read.label_of[i]])
                     : "";
    const std::string_view mask = r.masks.mask_of[i] >= 0 ? std::string_view(r.records[static_cast<size_t>(r.masks.mask_of[i])].path) : "";
    const bool escaped = !is_utf8(rec.path) || !is_utf8(label) || !is_utf8(mask);
    std::string escaped_path, escaped_label, escaped_mask;  // filled only for an escaped row
    if (escaped) {
      escaped_path = escape_name(rec.path);
      escaped_label = escape_name(label);
      escaped_mask = escape_name(mask);
    }
    field(escaped ? std::string_view(escaped_path) : std::string_view(rec.path));
    field(escaped ? std::string_view(escaped_label) : label);
    field(to_string(r.split.placement[i]));
    field(r.groups.group_of[i] >= 0 ? group_id(r.groups.group_of[i]) : "");
    field(probed ? std::to_string(rec.probe.width) : "");
    field(probed ? std::to_string(rec.probe.height) : "");
    field(probed ? to_string(rec.probe.mode) : "");
    field(probed ? std::to_string(rec.probe.bit_depth) : "");
    field(probed ? to_string(rec.probe.format) : "");
    field(escaped ? std::string_view(escaped_mask) : mask);
    field(record_codes);
    field(readable ? "" : defect_code(rec.defect));
    field(std::to_string(rec.size));
    field(probed && rec.probe.orientation ? std::to_string(rec.probe.orientation) : "");
    field(probed ? std::to_string(rec.probe.frames) : "");
    if (rec.features.has_content_hash) {
      for (uint64_t h : rec.features.content_hash) line.append(hex64(h));
    }
    line.push_back(',');
    if (r.split.fold[i] >= 0) line.append(std::to_string(r.split.fold[i]));
    if (rec.features.has_lookalike) {
      // std::to_chars with a precision writes what printf's "%.Nf" writes.
      const auto& st = rec.features.stats;
      char buf[64];
      for (auto [v, digits] : {std::pair{st.luma_mean, 1}, {st.luma_std, 1}, {st.entropy, 2}, {st.focus, 1}}) {
        line.push_back(',');
        auto res = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, digits);
        line.append(buf, res.ptr);
      }
    } else {
      line.append(",,,,");
    }
    line.append(escaped ? ",percent," : ",,");
    append_csv_field(line, exclusion_of(r, i, record_codes));
    line.push_back('\n');
    os << line;
  }
}

}  // namespace tamis
