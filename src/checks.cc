#include "tamis/checks.h"

#include <map>
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
    Finding f;
    f.code = "unreadable";
    f.severity = Severity::error;
    f.message = plural(paths.size(), "file cannot be read: ", "files cannot be read: ") +
                std::string(defect_message(defect));
    f.details = {{"reason", defect_code(defect)}, {"count", paths.size()}};
    f.paths = std::move(paths);
    out.push_back(std::move(f));
  }
  if (!unlabelled.empty()) {
    Finding f;
    f.code = "no-label";
    f.severity = Severity::warning;
    f.message = plural(unlabelled.size(), "image has", "images have") +
                " no class folder (they lie directly in ROOT or in a split folder) and are left out of the split";
    f.details = {{"count", unlabelled.size()}};
    f.paths = std::move(unlabelled);
    out.push_back(std::move(f));
  }
  if (!walk.links.empty()) {
    Finding f;
    f.code = "link-not-followed";
    f.severity = Severity::info;
    f.message = plural(walk.links.size(), "symbolic link was", "symbolic links were") +
                " not followed (tamis never follows links, so it cannot leave ROOT or loop)";
    f.details = {{"count", walk.links.size()}};
    f.paths = walk.links;
    out.push_back(std::move(f));
  }
  if (!walk.unreadable_dirs.empty()) {
    Finding f;
    f.code = "folder-unreadable";
    f.severity = Severity::warning;
    f.message = plural(walk.unreadable_dirs.size(), "folder or entry could not be listed",
                       "folders or entries could not be listed") +
                "; files below them are not counted";
    f.details = {{"count", walk.unreadable_dirs.size()}};
    f.paths = walk.unreadable_dirs;
    out.push_back(std::move(f));
  }
}

}  // namespace tamis
