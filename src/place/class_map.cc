#include "tamis/place/class_map.h"

#include <algorithm>
#include <stdexcept>

namespace tamis {

void validate_class_map(const ClassMap& map) {
  for (const auto& [from, to] : map.aliases) {
    if (from.empty() || to.empty()) throw std::invalid_argument("a class alias needs two names (VARIANT=CLASS)");
    if (from == to) throw std::invalid_argument("class alias '" + from + "' maps a class to itself");
    if (map.aliases.count(to))
      throw std::invalid_argument("class alias '" + from + "=" + to + "': '" + to +
                                  "' is itself a variant; map every variant to the final class");
  }
  for (const auto& name : map.excluded)
    if (name.empty()) throw std::invalid_argument("an excluded class needs a name");
}

ClassMapping apply_class_map(Labelling& labels, const ClassMap& map) {
  ClassMapping out;
  if (map.empty()) return out;
  out.applied = true;
  out.as_read = labels;
  out.class_excluded.assign(labels.label_of.size(), false);
  // Each read label's final name ("" when left out).
  std::vector<std::string> final_name(labels.names.size());
  for (size_t l = 0; l < labels.names.size(); ++l) {
    const auto it = map.aliases.find(labels.names[l]);
    final_name[l] = it == map.aliases.end() ? labels.names[l] : it->second;
    if (map.excluded.count(final_name[l])) final_name[l].clear();
  }
  std::vector<std::string> names;
  for (const auto& n : final_name)
    if (!n.empty()) names.push_back(n);
  std::sort(names.begin(), names.end());
  names.erase(std::unique(names.begin(), names.end()), names.end());
  std::vector<int32_t> new_index(labels.names.size(), -1);
  for (size_t l = 0; l < labels.names.size(); ++l)
    if (!final_name[l].empty())
      new_index[l] = static_cast<int32_t>(std::lower_bound(names.begin(), names.end(), final_name[l]) - names.begin());
  std::map<std::string, uint64_t> moved, left;
  for (size_t i = 0; i < labels.label_of.size(); ++i) {
    const int32_t l = labels.label_of[i];
    if (l < 0) continue;
    const std::string& read = labels.names[static_cast<size_t>(l)];
    if (map.aliases.count(read)) ++moved[read];
    if (new_index[static_cast<size_t>(l)] < 0) {
      const auto it = map.aliases.find(read);
      ++left[it == map.aliases.end() ? read : it->second];
      out.class_excluded[i] = true;
    }
    labels.label_of[i] = new_index[static_cast<size_t>(l)];
  }
  labels.names = std::move(names);
  for (const auto& [from, to] : map.aliases) out.aliases.push_back({from, to, moved.count(from) ? moved[from] : 0});
  for (const auto& name : map.excluded) out.excluded.push_back({name, left.count(name) ? left[name] : 0});
  return out;
}

}  // namespace tamis
