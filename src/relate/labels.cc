#include "tamis/relate/labels.h"

#include <algorithm>
#include <cctype>
#include <map>
#include <set>

namespace tamis {

std::string_view to_string(SplitName s) {
  switch (s) {
    case SplitName::train: return "train";
    case SplitName::val: return "val";
    case SplitName::test: return "test";
    case SplitName::none: break;
  }
  return "";
}

SplitName split_from_folder(std::string_view name) {
  std::string n(name);
  for (auto& c : n) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  if (n == "train" || n == "training") return SplitName::train;
  if (n == "val" || n == "valid" || n == "validation" || n == "dev") return SplitName::val;
  if (n == "test" || n == "testing") return SplitName::test;
  return SplitName::none;
}

namespace {
// Splits "a/b/c.png" into its folder components (not the file name).
std::vector<std::string_view> folders_of(std::string_view path) {
  std::vector<std::string_view> out;
  size_t start = 0;
  while (true) {
    size_t slash = path.find('/', start);
    if (slash == std::string_view::npos) break;
    out.push_back(path.substr(start, slash - start));
    start = slash + 1;
  }
  return out;
}
}  // namespace

Labelling assign_labels(const std::vector<FileRecord>& records, const std::vector<std::string>& layout_roots) {
  Labelling out;
  out.label_of.assign(records.size(), -1);
  out.given_split.assign(records.size(), SplitName::none);

  std::set<std::string_view> top;
  for (const auto& r : records) {
    if (r.kind != FileKind::image && r.kind != FileKind::unreadable) continue;
    auto f = folders_of(r.path);
    if (!f.empty()) top.insert(f[0]);
  }
  bool any_train = false, all_split = !top.empty();
  for (auto t : top) {
    SplitName s = split_from_folder(t);
    if (s == SplitName::none) all_split = false;
    if (s == SplitName::train) any_train = true;
  }
  out.pre_split = all_split && any_train && top.size() >= 2;

  std::vector<std::string_view> raw(records.size());
  std::set<std::string_view> names;
  for (size_t i = 0; i < records.size(); ++i) {
    const auto& r = records[i];
    if (r.kind != FileKind::image && r.kind != FileKind::unreadable) continue;
    auto f = folders_of(r.path);
    size_t at = out.pre_split ? 1 : 0;
    if (!f.empty() && std::find(layout_roots.begin(), layout_roots.end(), f[0]) != layout_roots.end()) at = 1;
    if (out.pre_split && !f.empty()) out.given_split[i] = split_from_folder(f[0]);
    if (f.size() > at) {
      raw[i] = f[at];
      names.insert(f[at]);
    }
  }
  out.names.assign(names.begin(), names.end());
  std::map<std::string_view, int32_t> index;
  for (size_t k = 0; k < out.names.size(); ++k) index[out.names[k]] = static_cast<int32_t>(k);
  for (size_t i = 0; i < records.size(); ++i)
    if (!raw[i].empty()) out.label_of[i] = index[raw[i]];
  return out;
}

}  // namespace tamis
