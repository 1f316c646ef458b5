#include "tamis/place/checks.h"

#include <array>
#include <map>
#include <set>
#include <string>

namespace tamis {

namespace {
std::string plural(size_t n, const char* one, const char* many) {
  return std::to_string(n) + " " + (n == 1 ? one : many);
}
}  // namespace

void check_inventory(const std::vector<FileRecord>& records, const Labelling& labels, const WalkResult& walk,
                     std::vector<Finding>& out) {
  std::map<Defect, std::vector<std::string>> unreadable;
  std::vector<std::string> unlabelled;
  for (size_t i = 0; i < records.size(); ++i) {
    const auto& r = records[i];
    if (r.kind == FileKind::unreadable) unreadable[r.defect].push_back(r.path);
    if (r.kind == FileKind::image && labels.label_of[i] < 0) unlabelled.push_back(r.path);
  }
  for (auto& [defect, paths] : unreadable) {
    const bool budget = defect == Defect::over_memory_budget, variant = is_undecodable_variant(defect);
    Finding f = make_finding(budget ? "over-memory-budget" : variant ? "undecodable-variant" : "unreadable");
    if (budget) {  // not damage: a file the settings do not let us decode
      f.message = plural(paths.size(), "image file was not decoded: ", "image files were not decoded: ") +
                  std::string(defect_message(defect));
    } else if (variant) {  // not damage: a file this build cannot decode
      f.message = plural(paths.size(), "file is not damaged but cannot be decoded here: ",
                         "files are not damaged but cannot be decoded here: ") +
                  std::string(defect_message(defect));
    } else {
      f.message = plural(paths.size(), "file cannot be read: ", "files cannot be read: ") +
                  std::string(defect_message(defect));
    }
    f.details = {{"reason", defect_code(defect)}, {"count", paths.size()}};
    f.paths = std::move(paths);
    out.push_back(std::move(f));
  }
  if (!unlabelled.empty()) {
    Finding f = make_finding("no-label");
    f.message = plural(unlabelled.size(), "image has", "images have") +
                " no class folder (they lie directly in ROOT or in a split folder) and are left out of the split";
    f.details = {{"count", unlabelled.size()}};
    f.paths = std::move(unlabelled);
    out.push_back(std::move(f));
  }
  // Entries the walk met and left alone: one info finding a kind, naming them.
  auto left_alone = [&](const std::vector<std::string>& paths, const char* code, const char* one, const char* many,
                        const char* why) {
    if (paths.empty()) return;
    Finding f = make_finding(code);
    f.message = plural(paths.size(), one, many) + why;
    f.details = {{"count", paths.size()}};
    f.paths = paths;
    out.push_back(std::move(f));
  };
  left_alone(walk.links, "link-not-followed", "symbolic link was", "symbolic links were",
             " not followed (tamis never follows links, so it cannot leave ROOT or loop)");
  left_alone(walk.special, "special-file", "FIFO, socket or device was", "FIFOs, sockets or devices were",
             " met and left unopened (they are not files of a data set)");
  if (!walk.unreadable_dirs.empty()) {
    Finding f = make_finding("folder-unreadable");
    f.message = plural(walk.unreadable_dirs.size(), "folder or entry could not be listed",
                       "folders or entries could not be listed") +
                "; files below them are not counted";
    f.details = {{"count", walk.unreadable_dirs.size()}};
    f.paths = walk.unreadable_dirs;
    out.push_back(std::move(f));
  }
}

void check_groups(const std::vector<FileRecord>& records, const Labelling& labels, const GroupResult& groups,
                  const GroupSettings& settings, std::vector<Finding>& out) {
  for (size_t gi = 0; gi < groups.groups.size(); ++gi) {
    const Group& g = groups.groups[gi];
    const std::string id = group_id(static_cast<int64_t>(gi));
    std::vector<std::string> paths;
    std::set<std::string> label_set;
    std::set<SplitName> splits;
    for (uint32_t m : g.members) {
      paths.push_back(records[m].path);
      if (labels.label_of[m] >= 0) label_set.insert(labels.names[static_cast<size_t>(labels.label_of[m])]);
      if (labels.pre_split) splits.insert(labels.given_split[m]);
    }
    std::vector<std::string> label_list(label_set.begin(), label_set.end());
    nlohmann::json base = {{"group", id}, {"size", g.members.size()}, {"labels", label_list},
                           {"diameter", g.diameter}};

    // Byte-identical sets inside the group (a near group may hold some).
    std::map<std::array<uint64_t, 2>, std::vector<std::string>> by_hash;
    for (uint32_t m : g.members) by_hash[records[m].features.content_hash].push_back(records[m].path);
    for (auto& [hash, same] : by_hash) {
      if (same.size() < 2) continue;
      Finding f = make_finding("byte-identical");
      f.message = std::to_string(same.size()) + " files are byte-identical copies of each other";
      f.details = base;
      f.paths = std::move(same);
      out.push_back(std::move(f));
    }
    if (!g.exact) {
      Finding f = make_finding("look-alike");
      f.message = std::to_string(g.members.size()) +
                  " images look alike (re-encoded, resized, recoloured, mirrored or turned copies); group " + id;
      f.details = base;
      f.paths = paths;
      out.push_back(std::move(f));
    }
    if (label_set.size() > 1) {
      Finding f = make_finding("label-conflict");
      std::string names;
      for (const auto& l : label_list) names += (names.empty() ? "" : ", ") + l;
      f.message = "the same picture carries " + std::to_string(label_set.size()) + " labels (" + names + "); group " + id;
      f.details = base;
      f.paths = paths;
      out.push_back(std::move(f));
    }
    splits.erase(SplitName::none);
    if (splits.size() > 1) {
      Finding f = make_finding("split-leak");
      std::string names;
      for (auto s : splits) names += (names.empty() ? "" : ", ") + std::string(to_string(s));
      f.message = "copies of one picture sit in more than one split (" + names + "): test accuracy will be inflated; group " + id;
      f.details = base;
      f.paths = paths;
      out.push_back(std::move(f));
    }
    if (g.diameter > 2 * settings.radius) {
      Finding f = make_finding("lookalike-chain");
      f.message = "group " + id + " spans a hash distance of " + std::to_string(g.diameter) +
                  ", more than twice the match radius: a chain of look-alikes may join unrelated images";
      f.details = base;
      f.details["diameter_exact"] = g.diameter_exact;
      f.paths = paths;
      out.push_back(std::move(f));
    }
  }
}

void check_split(const std::vector<FileRecord>& records, const Labelling& labels, const SplitOutcome& split,
                 const SplitSettings& settings, bool kept_folders, std::vector<Finding>& out) {
  const size_t nc = labels.names.size();
  std::vector<std::array<uint64_t, 3>> counts(nc);
  std::vector<uint64_t> capped(nc, 0), total(nc, 0);
  std::array<bool, 3> split_used{};
  for (size_t i = 0; i < records.size(); ++i) {
    int32_t l = labels.label_of[i];
    if (l < 0 || records[i].kind != FileKind::image) continue;
    ++total[static_cast<size_t>(l)];
    if (split.why[i] == Exclusion::capped) ++capped[static_cast<size_t>(l)];
    if (split.placement[i] != Placement::excluded) {
      ++counts[static_cast<size_t>(l)][static_cast<size_t>(split.placement[i])];
      split_used[static_cast<size_t>(split.placement[i])] = true;
    }
  }
  for (size_t c = 0; c < nc; ++c) {
    if (capped[c] > 0) {
      Finding f = make_finding("class-capped");
      f.message = "class " + labels.names[c] + ": " + std::to_string(capped[c]) + " of " + std::to_string(total[c]) +
                  " images left out by the per-class cap of " + std::to_string(settings.per_class);
      f.details = {{"label", labels.names[c]}, {"capped", capped[c]}, {"count", total[c]}, {"cap", settings.per_class}};
      out.push_back(std::move(f));
    }
    std::vector<std::string> missing;
    for (int s = 0; s < 3; ++s) {
      bool expected = kept_folders ? split_used[s] : settings.percent[s] > 0;
      if (expected && counts[c][s] == 0 && total[c] > capped[c]) missing.emplace_back(to_string(static_cast<Placement>(s)));
    }
    if (!missing.empty()) {
      Finding f = make_finding("split-without-class");
      std::string list;
      for (const auto& m : missing) list += (list.empty() ? "" : ", ") + m;
      f.message = "class " + labels.names[c] + " has no image in " + list + " (" + std::to_string(total[c]) +
                  " images in all): it cannot be measured there";
      f.details = {{"label", labels.names[c]}, {"missing", missing}, {"count", total[c]}};
      out.push_back(std::move(f));
    }
  }
}

}  // namespace tamis
