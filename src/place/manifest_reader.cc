#include "tamis/place/manifest_reader.h"

#include <algorithm>
#include <charconv>
#include <istream>
#include <stdexcept>
#include <string_view>

#include "tamis/base/text.h"

namespace tamis {

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

// Row k's path (or another name column) as bytes: unescaped when its name_escape
// column says "percent".
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
// Row k checked: the header's field count (a row with another count is a file
// cut off or mangled: refused, not half kept, since a cut row would otherwise
// drop its images from a kept split) and a known split, which it returns.
Placement checked_split(const std::vector<std::vector<std::string>>& rows, size_t k, size_t width, size_t split_col) {
  const auto& r = rows[k];
  if (r.size() != width)
    throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has " + std::to_string(r.size()) +
                             " fields where the header has " + std::to_string(width) + " (cut off or malformed)");
  const std::string& v = r[split_col];
  const Placement p = placement_from_string(v);
  if (p == Placement::excluded && v != "excluded" && !v.empty())
    throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has split '" + v +
                             "' (train, val, test, excluded or empty expected)");
  return p;
}

bool blank(const std::vector<std::string>& r) { return r.size() == 1 && r[0].empty(); }
}  // namespace

std::vector<std::string> read_manifest_paths(std::istream& is) {
  auto rows = parse_csv(is);
  const size_t path_col = column(rows.front(), "path"), escape_col = escape_column(rows.front());
  std::vector<std::string> out;
  for (size_t k = 1; k < rows.size(); ++k)
    if (rows[k].size() > path_col) out.push_back(row_path(rows, k, path_col, escape_col));
  return out;
}

std::vector<ManifestRow> read_manifest_rows(std::istream& is) {
  auto rows = parse_csv(is);
  const auto& header = rows.front();
  const size_t path_col = column(header, "path"), label_col = column(header, "label");
  const size_t split_col = column(header, "split"), mask_col = column(header, "mask_path");
  const size_t escape_col = escape_column(header), width = header.size();
  std::vector<ManifestRow> out;
  for (size_t k = 1; k < rows.size(); ++k) {
    if (blank(rows[k])) continue;
    ManifestRow row;
    row.split = checked_split(rows, k, width, split_col);
    row.path = row_path(rows, k, path_col, escape_col);
    row.label = row_path(rows, k, label_col, escape_col);
    row.mask_path = rows[k][mask_col].empty() ? std::string() : row_path(rows, k, mask_col, escape_col);
    out.push_back(std::move(row));
  }
  return out;
}

KeepMap read_manifest_splits(std::istream& is) {
  auto rows = parse_csv(is);
  const size_t path_col = column(rows.front(), "path"), split_col = column(rows.front(), "split");
  const size_t escape_col = escape_column(rows.front());
  const size_t width = rows.front().size();
  KeepMap out;
  for (size_t k = 1; k < rows.size(); ++k) {
    if (blank(rows[k])) continue;  // a blank line
    const Placement p = checked_split(rows, k, width, split_col);
    if (p != Placement::excluded) out[row_path(rows, k, path_col, escape_col)] = p;
  }
  return out;
}

}  // namespace tamis
