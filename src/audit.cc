#include "tamis/audit.h"

#include "tamis/checks.h"

namespace tamis {

AuditIndex read_tree(const AuditSettings& settings) {
  AuditIndex r;
  r.settings = settings;
  r.settings.read.on_progress = nullptr;
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
  check_images(r.records, r.labels, settings.checks, r.findings);
  check_labels(r.records, r.labels, r.walk, settings.checks, r.findings);
  return r;
}

AuditResult place(AuditIndex index, const SplitSettings& split, const KeepMap* keep) {
  AuditResult r;
  static_cast<AuditIndex&>(r) = std::move(index);
  r.settings.split = split;
  const bool keep_folders = r.labels.pre_split && !split.resplit;
  std::vector<SplitItem> items(r.records.size());
  for (size_t i = 0; i < r.records.size(); ++i) {
    items[i].label = r.labels.label_of[i];
    items[i].group = r.groups.group_of[i];
    items[i].eligible = r.records[i].kind == FileKind::image;
    items[i].key = r.records[i].path;
    if (keep) {
      auto it = keep->find(r.records[i].path);
      if (it != keep->end()) items[i].previous = it->second;
    }
  }
  if (keep_folders) {
    // The tree's own split is kept file by file (leaks are reported, not repaired).
    r.split.placement.assign(r.records.size(), Placement::excluded);
    r.split.fold.assign(r.records.size(), -1);
    r.split.why.assign(r.records.size(), Exclusion::none);
    for (size_t i = 0; i < r.records.size(); ++i) {
      if (items[i].eligible && items[i].label >= 0 && r.labels.given_split[i] != SplitName::none)
        r.split.placement[i] = static_cast<Placement>(r.labels.given_split[i]);
      else
        r.split.why[i] = Exclusion::not_eligible;
    }
  } else {
    r.split = assign_splits(items, r.labels.names, split);
  }
  r.index_findings = r.findings;
  check_split(r.records, r.labels, r.split, split, keep_folders, r.findings);
  sort_findings(r.findings);
  return r;
}

AuditResult run_audit(const AuditSettings& settings) { return place(read_tree(settings), settings.split); }

int policy_exit_status(const AuditResult& result) {
  for (const auto& f : result.findings)
    if (f.severity == Severity::error) return 1;
  return 0;
}

}  // namespace tamis
