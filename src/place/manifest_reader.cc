#include "tamis/place/manifest_reader.h"

#include <algorithm>
#include <charconv>
#include <functional>
#include <istream>
#include <stdexcept>
#include <string_view>

#include "tamis/base/text.h"

namespace tamis {

namespace {
using Row = std::vector<std::string>;

// Reads RFC 4180 text record by record, calling on_row(row, k) for record k (0:
// the header) as soon as it is complete, so that a reader keeps only what it
// needs of each row (memory does not grow with the manifest's columns). Records:
// fields split on commas, quoted fields may hold commas, quotes (doubled) and
// line breaks; records end at CRLF or LF outside quotes. Throws when the text
// ends inside a quoted field or holds no record.
void each_csv_row(std::istream& is, const std::function<void(Row&, size_t)>& on_row) {
  Row row;
  std::string field;
  bool quoted = false, at_start = true, any = false;
  size_t line = 1, records = 0;
  char c;
  auto end_field = [&] {
    row.push_back(std::move(field));
    field.clear();
    at_start = true;
  };
  auto end_row = [&] {
    on_row(row, records++);
    row.clear();
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
      end_row();
      ++line;
    } else {
      field.push_back(c);
      at_start = false;
    }
  }
  if (quoted) throw std::runtime_error("manifest: unterminated quoted field at line " + std::to_string(line));
  if (any && (!field.empty() || !row.empty())) {
    end_field();
    end_row();
  }
  if (records == 0) throw std::runtime_error("manifest: the file is empty");
}

size_t column(const Row& header, const char* name) {
  auto it = std::find(header.begin(), header.end(), name);
  if (it == header.end()) throw std::runtime_error(std::string("manifest: no '") + name + "' column in the header");
  return static_cast<size_t>(it - header.begin());
}

// The name_escape column (a column that older manifests do not have), or npos.
size_t escape_column(const Row& header) {
  const auto it = std::find(header.begin(), header.end(), "name_escape");
  return it == header.end() ? std::string::npos : static_cast<size_t>(it - header.begin());
}

// Record k's path (or another name column) as bytes: unescaped when its
// name_escape column says "percent".
std::string row_path(const Row& r, size_t k, size_t path_col, size_t escape_col) {
  const std::string& path = r[path_col];
  if (escape_col >= r.size() || r[escape_col].empty()) return path;
  const std::string& how = r[escape_col];
  if (how != "percent")
    throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has name_escape '" + how +
                             "' (empty or percent expected)");
  auto bytes = unescape_name(path);
  if (!bytes)
    throw std::runtime_error("manifest: record " + std::to_string(k + 1) + " has a path whose percent escape is broken");
  return *bytes;
}

// Record k checked: the header's field count (a row with another count is a file
// cut off or mangled: refused, not half kept, since a cut row would otherwise
// drop its images from a kept split) and a known split, which it returns.
Placement checked_split(const Row& r, size_t k, size_t width, size_t split_col) {
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

bool blank(const Row& r) { return r.size() == 1 && r[0].empty(); }
}  // namespace

std::vector<std::string> read_manifest_paths(std::istream& is) {
  size_t path_col = 0, escape_col = 0;
  std::vector<std::string> out;
  each_csv_row(is, [&](Row& r, size_t k) {
    if (k == 0) {
      path_col = column(r, "path");
      escape_col = escape_column(r);
    } else if (r.size() > path_col) {
      out.push_back(row_path(r, k, path_col, escape_col));
    }
  });
  return out;
}

std::vector<ManifestRow> read_manifest_rows(std::istream& is) {
  size_t path_col = 0, label_col = 0, split_col = 0, mask_col = 0, escape_col = 0, width = 0;
  std::vector<ManifestRow> out;
  each_csv_row(is, [&](Row& r, size_t k) {
    if (k == 0) {
      path_col = column(r, "path");
      label_col = column(r, "label");
      split_col = column(r, "split");
      mask_col = column(r, "mask_path");
      escape_col = escape_column(r);
      width = r.size();
      return;
    }
    if (blank(r)) return;
    ManifestRow row;
    row.split = checked_split(r, k, width, split_col);
    row.path = row_path(r, k, path_col, escape_col);
    row.label = row_path(r, k, label_col, escape_col);
    row.mask_path = r[mask_col].empty() ? std::string() : row_path(r, k, mask_col, escape_col);
    out.push_back(std::move(row));
  });
  return out;
}

KeepMap read_manifest_splits(std::istream& is) {
  size_t path_col = 0, split_col = 0, escape_col = 0, width = 0;
  KeepMap out;
  each_csv_row(is, [&](Row& r, size_t k) {
    if (k == 0) {
      path_col = column(r, "path");
      split_col = column(r, "split");
      escape_col = escape_column(r);
      width = r.size();
      return;
    }
    if (blank(r)) return;  // a blank line
    const Placement p = checked_split(r, k, width, split_col);
    if (p != Placement::excluded) out[row_path(r, k, path_col, escape_col)] = p;
  });
  return out;
}

}  // namespace tamis
