#include "tamis/manifest.h"

#include <algorithm>
#include <charconv>
#include <istream>
#include <numeric>
#include <stdexcept>
#include <string_view>

#include "tamis/text.h"

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

RecordFlags record_flags(const AuditResult& result) {
  RecordFlags out;
  const auto& records = result.records;
  for (const auto& f : result.findings) out.codes.push_back(f.code);
  std::sort(out.codes.begin(), out.codes.end());
  out.codes.erase(std::unique(out.codes.begin(), out.codes.end()), out.codes.end());
  // Records are in path order (the walk's); a table of them in that order finds a path.
  std::vector<uint32_t> by_path(records.size());
  std::iota(by_path.begin(), by_path.end(), 0u);
  auto path_less = [&](uint32_t a, uint32_t b) { return records[a].path < records[b].path; };
  if (!std::is_sorted(by_path.begin(), by_path.end(), path_less)) std::sort(by_path.begin(), by_path.end(), path_less);
  auto below = [&](uint32_t i, const std::string& v) { return records[i].path < v; };
  for (const auto& f : result.findings) {
    const auto code = static_cast<uint32_t>(std::lower_bound(out.codes.begin(), out.codes.end(), f.code) - out.codes.begin());
    // A finding's paths are sorted (sort_findings): each is searched for from
    // where the last was found, by galloping (steps 1, 2, 4, ... then halving),
    // so a finding naming every file costs a pass, not a binary search a path.
    const bool sorted = std::is_sorted(f.paths.begin(), f.paths.end());
    auto from = by_path.begin();
    for (const auto& p : f.paths) {
      if (!sorted) from = by_path.begin();
      size_t step = 1;
      auto to = from;
      while (to != by_path.end() && below(*to, p)) {
        from = to + 1;
        to = static_cast<size_t>(by_path.end() - from) > step ? from + static_cast<long>(step) : by_path.end();
        step *= 2;
      }
      auto it = std::lower_bound(from, to, p, below);
      if (it != by_path.end() && records[*it].path == p) out.pairs.emplace_back(*it, code);
      from = it;
    }
  }
  std::sort(out.pairs.begin(), out.pairs.end());
  out.pairs.erase(std::unique(out.pairs.begin(), out.pairs.end()), out.pairs.end());
  return out;
}

void write_manifest(std::ostream& os, const AuditResult& r) {
  static const char* kHeader[] = {"path", "label", "split", "group", "width", "height", "mode", "bit_depth",
                                  "format", "mask_path", "flags", "reason", "bytes", "orientation", "frames",
                                  "content_hash", "fold", "brightness", "contrast", "entropy", "sharpness",
                                  "name_escape"};
  std::string line;
  for (size_t c = 0; c < std::size(kHeader); ++c) {
    if (c) line.push_back(',');
    line.append(kHeader[c]);
  }
  line.append("\r\n");
  os << line;
  const RecordFlags flags = record_flags(r);
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
    const std::string_view label = r.labels.label_of[i] >= 0 ? std::string_view(r.labels.names[r.labels.label_of[i]]) : "";
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
      for (uint64_t h : rec.features.content_hash)
        for (int shift = 60; shift >= 0; shift -= 4) line.push_back("0123456789abcdef"[(h >> shift) & 15]);
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
    line.append(escaped ? ",percent\r\n" : ",\r\n");
    os << line;
  }
}

namespace {
// Parses RFC 4180 text into rows of fields.
std::vector<std::vector<std::string>> parse_csv(std::istream& is) {
  // RFC 4180 records: fields split on commas, quoted fields may hold commas,
  // quotes (doubled) and line breaks; records end at CRLF or LF outside quotes.
  std::vector<std::vector<std::string>> rows;
  std::vector<std::string> row;
  std::string field;
  bool quoted = false, at_start = true, any = false;
  size_t line = 1;
  char c;
  auto end_field = [&] {
    row.push_back(std::move(field));
    field.clear();
    at_start = true;
  };
  while (is.get(c)) {
    any = true;
    if (quoted) {
      if (c == '"') {
        if (is.peek() == '"') {
          is.get(c);
          field.push_back('"');
        } else {
          quoted = false;
        }
      } else {
        if (c == '\n') ++line;
        field.push_back(c);
      }
      continue;
    }
    if (c == '"' && at_start) {
      quoted = true;
      at_start = false;
    } else if (c == ',') {
      end_field();
    } else if (c == '\r' && is.peek() == '\n') {
      continue;
    } else if (c == '\n') {
      end_field();
      rows.push_back(std::move(row));
      row.clear();
      ++line;
    } else {
      field.push_back(c);
      at_start = false;
    }
  }
  if (quoted) throw std::runtime_error("manifest: unterminated quoted field at line " + std::to_string(line));
  if (any && (!field.empty() || !row.empty())) {
    end_field();
    rows.push_back(std::move(row));
  }
  if (rows.empty()) throw std::runtime_error("manifest: the file is empty");
  return rows;
}

size_t column(const std::vector<std::string>& header, const char* name) {
  auto it = std::find(header.begin(), header.end(), name);
  if (it == header.end()) throw std::runtime_error(std::string("manifest: no '") + name + "' column in the header");
  return static_cast<size_t>(it - header.begin());
}

// The name_escape column (a column that older manifests do not have), or npos.
size_t escape_column(const std::vector<std::string>& header) {
  const auto it = std::find(header.begin(), header.end(), "name_escape");
  return it == header.end() ? std::string::npos : static_cast<size_t>(it - header.begin());
}

// Row k's path as bytes: unescaped when its name_escape column says "percent".
std::string row_path(const std::vector<std::vector<std::string>>& rows, size_t k, size_t path_col, size_t escape_col) {
  const std::string& path = rows[k][path_col];
  if (escape_col >= rows[k].size() || rows[k][escape_col].empty()) return path;
  const std::string& how = rows[k][escape_col];
  if (how != "percent")
    throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has name_escape '" + how +
                             "' (empty or percent expected)");
  auto bytes = unescape_name(path);
  if (!bytes)
    throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has a path whose percent escape is broken");
  return *bytes;
}
}  // namespace

std::vector<std::string> read_manifest_paths(std::istream& is) {
  auto rows = parse_csv(is);
  const size_t path_col = column(rows.front(), "path"), escape_col = escape_column(rows.front());
  std::vector<std::string> out;
  for (size_t k = 1; k < rows.size(); ++k)
    if (rows[k].size() > path_col) out.push_back(row_path(rows, k, path_col, escape_col));
  return out;
}

KeepMap read_manifest_splits(std::istream& is) {
  auto rows = parse_csv(is);
  const size_t path_col = column(rows.front(), "path"), split_col = column(rows.front(), "split");
  const size_t escape_col = escape_column(rows.front());
  const size_t width = rows.front().size();
  KeepMap out;
  for (size_t k = 1; k < rows.size(); ++k) {
    const auto& r = rows[k];
    if (r.size() == 1 && r[0].empty()) continue;  // a blank line
    // A row with another field count is a file cut off or mangled: refused, not
    // half kept (a cut row would otherwise drop its images from the kept split).
    if (r.size() != width)
      throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has " + std::to_string(r.size()) +
                               " fields where the header has " + std::to_string(width) + " (cut off or malformed)");
    const std::string& v = r[split_col];
    const Placement p = placement_from_string(v);
    if (p == Placement::excluded && v != "excluded" && !v.empty())
      throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has split '" + v +
                               "' (train, val, test, excluded or empty expected)");
    if (p != Placement::excluded) out[row_path(rows, k, path_col, escape_col)] = p;
  }
  return out;
}

}  // namespace tamis
