#include "tamis/pipeline/audit.h"

#include <algorithm>
#include <exception>
#include <optional>
#include <thread>

#include "tamis/place/checks.h"
#include "tamis/place/leave_out.h"
#include "tamis/read/tree_reader.h"

namespace tamis {
std::vector<uint32_t> shown_records(const AuditIndex& r) {
  std::vector<uint32_t> shown;
  for (const auto& g : r.groups.groups) shown.insert(shown.end(), g.members.begin(), g.members.end());
  for (uint32_t i = 0; i < r.records.size(); ++i)
    if (r.masks.mask_of[i] >= 0) {
      shown.push_back(i);
      shown.push_back(static_cast<uint32_t>(r.masks.mask_of[i]));
    }
  // The first images (in path order) that meet each quality floor: those the
  // report may show as flagged near-uniform, underexposed, ... whatever the
  // policy's z cut (which decides which of them are flagged).
  unsigned counts[std::size(kFloorCodes)] = {};
  for (uint32_t i = 0; i < r.records.size(); ++i) {
    const unsigned met = quality_floors_met(r.records[i]);
    bool take = false;
    for (size_t k = 0; k < std::size(kFloorCodes); ++k)
      if ((met >> k & 1u) && counts[k] < kFloorCandidatesKept) {
        ++counts[k];
        take = true;
      }
    if (take) shown.push_back(i);
  }
  return shown;
}

void pair_and_label(AuditIndex& r, StageClock& clock) {
  r.masks = pair_masks(r.records, r.settings.masks);
  clock.lap("masks");
  r.labels = assign_labels(r.records, r.masks.layout_roots);
  clock.lap("labels");
}

void count_totals(AuditIndex& r) {
  r.totals = {};
  for (const auto& rec : r.records) {
    ++r.totals.files_seen;
    switch (rec.kind) {
      case FileKind::image: ++r.totals.images; break;
      case FileKind::mask: ++r.totals.masks; break;
      case FileKind::unreadable: ++r.totals.unreadable; break;
      case FileKind::ignored: ++r.totals.ignored; break;
    }
  }
}

AuditIndex read_tree(const TreeSettings& settings) {
  AuditIndex r;
  r.settings = settings;
  r.settings.read.on_progress = nullptr;
  StageClock clock(&r.times);
  TreeReader reader(settings.root, settings.read, settings.cache_file);
  r.walk = reader.walk(clock);
  r.records = reader.read(r.walk, r.thumbs, r.counts, clock);
  pair_and_label(r, clock);
  GroupSettings gs = settings.groups;
  gs.threads = settings.read.threads;
  std::optional<GroupResult> stored = reader.stored_groups(r.records, group_settings_key(gs));
  if (stored) {
    r.groups = std::move(*stored);
    reader.load_thumbnails(r.records, r.thumbs, shown_records(r));
  } else {
    reader.load_all_thumbnails(r.records, r.thumbs);
    // The listing's last use was re-reading files whose thumbnails had gone; its
    // entries (about 110 bytes a file) are not held through the join.
    r.walk.files.clear();
    r.walk.files.shrink_to_fit();
    r.groups = find_groups(r.records, r.thumbs, gs);
    reader.store_groups(r.groups);
  }
  r.cache_note = reader.note();
  clock.lap(stored ? "groups (cached)" : "groups");
  // Every thumbnail an output shows is loaded now and kept in memory; the others
  // are freed (a scratch file with them closes) or stay in the cache.
  r.thumbs.keep_only(shown_records(r));
  r.walk.files.clear();  // (already, unless the groups came from the cache)
  r.walk.files.shrink_to_fit();
  count_totals(r);
  return r;
}

AuditResult place(AuditIndex index, const PlaceOptions& opt) {
  AuditResult r;
  static_cast<AuditIndex&>(r) = std::move(index);
  r.placed.split = opt.split;
  r.placed.checks = opt.policy.thresholds;
  r.placed.classes = opt.classes;
  // The classes this run trains on: aliases merged, left-out classes unlabelled
  // (the saved index keeps the labels as read).
  r.class_mapping = apply_class_map(r.labels, opt.classes);
  r.fail_on_new_only = opt.policy.fail_on_new_only;
  StageClock clock(&r.times);

  // The split on a second thread while the checks run: neither reads what the
  // other writes, and each writes its own part of the result.
  const SplitSettings& split = opt.split;
  const bool keep_folders = r.labels.pre_split && !split.resplit;
  std::vector<SplitItem> items(r.records.size());
  for (size_t i = 0; i < r.records.size(); ++i) {
    items[i].label = r.labels.label_of[i];
    items[i].group = r.groups.group_of[i];
    items[i].eligible = r.records[i].kind == FileKind::image;
    items[i].key = r.records[i].path;
    if (opt.keep) {
      auto it = opt.keep->find(r.records[i].path);
      if (it != opt.keep->end()) items[i].previous = it->second;
    }
  }
  auto run_checks = [&] {
    // The inventory is of the files as read: a left-out class still has its folder.
    check_inventory(r.records, r.class_mapping.applied ? r.class_mapping.as_read : r.labels, r.walk, r.findings);
    check_masks(r.records, r.masks, r.findings);
    check_groups(r.records, r.labels, r.groups, r.settings.groups, r.findings);
    check_images(r.records, r.labels, r.placed.checks, r.findings);
    check_labels(r.records, r.labels, r.walk, r.placed.checks, r.findings);
  };
  // Images left out by their findings or as extra members of a group: the
  // checks first, then the split among what is left (place/leave_out.h).
  const bool leaving_out = !split.exclude_flagged.empty() || split.one_per_group;
  std::vector<Exclusion> left_out;
  if (leaving_out) {
    run_checks();
    left_out = leave_out(r.records, r.labels, r.masks, r.groups, r.findings, split);
    for (size_t i = 0; i < r.records.size(); ++i)
      if (left_out[i] != Exclusion::none) items[i].eligible = false;
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
  }
  std::exception_ptr split_error;
  std::thread splitter;
  if (!keep_folders) {
    splitter = std::thread([&] {
      try {
        r.split = assign_splits(items, r.labels.names, split);
      } catch (...) {
        split_error = std::current_exception();
      }
    });
  }
  if (!leaving_out) {
    try {
      run_checks();  // while the split runs
    } catch (...) {
      if (splitter.joinable()) splitter.join();
      throw;
    }
  }
  if (splitter.joinable()) splitter.join();
  if (split_error) std::rethrow_exception(split_error);
  // Why the items left out before the split are out (the split saw them as
  // ineligible, so they are already excluded, without a fold).
  for (size_t i = 0; i < r.class_mapping.class_excluded.size(); ++i)
    if (r.class_mapping.class_excluded[i]) r.split.why[i] = Exclusion::class_excluded;
  for (size_t i = 0; i < left_out.size(); ++i)
    if (left_out[i] != Exclusion::none) r.split.why[i] = left_out[i];
  check_split(r.records, r.labels, r.split, split, keep_folders, r.findings);
  clock.lap("checks + split");

  // Policy, then order, then the baseline's verdict per finding.
  apply_policy(opt.policy, r.totals.unreadable, r.totals.images + r.totals.unreadable, r.findings);
  sort_findings(r.findings);
  r.known.assign(r.findings.size(), false);
  r.accept = opt.policy.accept;
  r.accepted = match_accepts(r.accept, r.findings);
  if (opt.baseline) {
    const Baseline& b = *opt.baseline;
    r.baseline.present = true;
    std::set<std::string> now;
    for (size_t k = 0; k < r.findings.size(); ++k) {
      auto ids = finding_identities(r.findings[k]);
      bool known = std::all_of(ids.begin(), ids.end(), [&](const std::string& id) { return b.identities.count(id) > 0; });
      r.known[k] = known;
      (known ? r.baseline.findings_known : r.baseline.findings_new)++;
      now.insert(ids.begin(), ids.end());
    }
    for (const auto& id : b.identities) r.baseline.findings_gone += now.count(id) == 0;
    if (b.has_files) {
      std::set<std::string> files;
      for (const auto& rec : r.records)
        if (is_manifest_row(rec)) files.insert(rec.path);
      std::set_difference(files.begin(), files.end(), b.files.begin(), b.files.end(),
                          std::back_inserter(r.baseline.files_added));
      std::set_difference(b.files.begin(), b.files.end(), files.begin(), files.end(),
                          std::back_inserter(r.baseline.files_removed));
    }
  }
  return r;
}

AuditResult place(AuditIndex index, const SplitSettings& split, const KeepMap* keep) {
  PlaceOptions opt;
  opt.split = split;
  opt.policy.thresholds = index.placed.checks;
  opt.keep = keep;
  return place(std::move(index), opt);
}

AuditResult run_audit(const AuditSettings& settings) {
  AuditIndex index = read_tree(settings);
  index.placed.checks = settings.checks;
  return place(std::move(index), settings.split);
}

int policy_exit_status(const AuditResult& result) {
  for (size_t k = 0; k < result.findings.size(); ++k)
    if (breaks_policy(result.findings[k].severity, result.known[k], result.fail_on_new_only, result.accepted_reason(k) != nullptr)) return 1;
  return 0;
}

}  // namespace tamis
