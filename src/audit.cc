#include "tamis/audit.h"

#include "tamis/checks.h"

namespace tamis {

AuditResult run_audit(const AuditSettings& settings) {
  AuditResult r;
  r.walk = walk_tree(settings.root);
  r.records = read_files(settings.root, r.walk.files, settings.read);
  r.walk.files.clear();
  r.walk.files.shrink_to_fit();
  r.labels = assign_labels(r.records);
  GroupSettings gs = settings.groups;
  gs.threads = settings.read.threads;
  r.groups = find_groups(r.records, gs);

  for (const auto& rec : r.records) {
    ++r.totals.files_seen;
    switch (rec.kind) {
      case FileKind::image: ++r.totals.images; break;
      case FileKind::mask: ++r.totals.masks; break;
      case FileKind::unreadable: ++r.totals.unreadable; break;
      case FileKind::ignored: ++r.totals.ignored; break;
    }
  }

  check_inventory(r.records, r.labels, r.walk, r.findings);
  check_groups(r.records, r.labels, r.groups, settings.groups, r.findings);

  // Split: a pre-split tree keeps its folders' split; otherwise a stratified split.
  std::vector<SplitItem> items(r.records.size());
  for (size_t i = 0; i < r.records.size(); ++i) {
    items[i].label = r.labels.label_of[i];
    items[i].group = r.groups.group_of[i];
    items[i].eligible = r.records[i].kind == FileKind::image;
  }
  if (r.labels.pre_split) {
    r.placement.assign(r.records.size(), Placement::excluded);
    for (size_t i = 0; i < r.records.size(); ++i)
      if (items[i].eligible && items[i].label >= 0 && r.labels.given_split[i] != SplitName::none)
        r.placement[i] = static_cast<Placement>(r.labels.given_split[i]);
  } else {
    r.placement = assign_splits(items, r.labels.names, settings.split);
  }
  sort_findings(r.findings);
  return r;
}

int policy_exit_status(const AuditResult& result) {
  for (const auto& f : result.findings)
    if (f.severity == Severity::error) return 1;
  return 0;
}

}  // namespace tamis
