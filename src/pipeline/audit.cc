#include "tamis/pipeline/audit.h"

#include <algorithm>
#include <exception>
#include <memory>
#include <optional>
#include <thread>

#include <xxhash.h>

#include "tamis/read/cache.h"
#include "tamis/place/checks.h"
#include "tamis/version.h"

namespace tamis {

AuditIndex read_tree(const AuditSettings& settings) {
  AuditIndex r;
  r.settings = settings;
  r.settings.read.on_progress = nullptr;
  StageClock clock(&r.times);
  // The cache loads on a thread of its own while the tree is listed; files are
  // stat'ed only when stored records may match them (otherwise every file is
  // opened anyway, and stamped from its descriptor).
  std::unique_ptr<RecordCache> cache;
  std::thread loader;
  if (!settings.cache_file.empty()) {
    loader = std::thread([&] {
      const auto& d = settings.read.decode;
      std::string key = std::string(kToolVersion) + "|" + std::to_string(d.max_pixels) + "|" +
                        std::to_string(d.reduced_side) + "|" + std::to_string(settings.read.max_bytes) + "|" +
                        std::to_string(d.max_image_bytes) + "|" + std::to_string(d.block_above_pixels) + "|" +
                        std::to_string(kDecodeRules);
      try {
        cache = std::make_unique<RecordCache>(settings.cache_file, settings.root, key);
        if (cache->rebuilt()) r.cache_note = "the cache file was damaged; it was moved aside and rebuilt";
      } catch (const std::exception& e) {
        r.cache_note = std::string("the cache cannot be used: ") + e.what();
      }
    });
  }
  try {
    r.walk = walk_tree(settings.root, settings.read.threads, false);
  } catch (...) {
    if (loader.joinable()) loader.join();
    throw;
  }
  if (loader.joinable()) loader.join();
  if (cache && cache->rows() > 0) stamp_files(settings.root, r.walk, settings.read.threads);
  clock.lap(settings.cache_file.empty() ? "walk" : "walk + cache load");
  ReadOptions ro = settings.read;
  ro.cache = cache.get();
  ro.counts = &r.counts;
  std::vector<int64_t> thumbnail_row;  // records whose thumbnail is still in the cache
  ro.thumbnail_row = &thumbnail_row;
  std::vector<uint32_t> by_content;  // records reused by content hash: stored anew below
  ro.by_content = &by_content;
  ro.thumbs = &r.thumbs;
  r.records = read_files(settings.root, r.walk.files, ro);
  clock.lap("read");
  // Thumbnails of records that came from the cache, loaded only where needed; a
  // file whose stored thumbnail has gone (another run changed the cache) is read again.
  auto load_thumbnails = [&](const std::vector<uint32_t>& which) {
    if (!cache || which.empty()) return;
    std::vector<uint32_t> missing;
    try {
      missing = cache->load_thumbnails(r.thumbs, thumbnail_row, which);
    } catch (const std::exception& e) {
      missing = which;
      r.cache_note = std::string("the cache could not be read: ") + e.what();
    }
    for (uint32_t i : which) thumbnail_row[i] = -1;
    if (missing.empty()) return;
    std::vector<WalkEntry> again;
    for (uint32_t i : missing) again.push_back(r.walk.files[i]);
    ReadOptions plain = settings.read;
    plain.on_progress = nullptr;
    ThumbnailTable fresh_thumbs;
    plain.thumbs = &fresh_thumbs;
    std::vector<FileRecord> fresh = read_files(settings.root, again, plain);
    r.thumbs.make_room(missing);
    for (size_t k = 0; k < missing.size(); ++k) {
      r.records[missing[k]] = std::move(fresh[k]);
      r.thumbs.at(missing[k]) = fresh_thumbs.at(k);
    }
    r.counts.read += missing.size();
  };
  if (cache) {
    // A record reused by content (a touched, rewritten, copied or moved file) is
    // stored anew, under its own path and stamp: with its thumbnail, loaded first.
    load_thumbnails(by_content);
    try {
      cache->store(r.records, r.thumbs);  // as read, before mask pairing changes kinds
    } catch (const std::exception& e) {
      r.cache_note = std::string("the cache could not be updated: ") + e.what();
    }
  }
  if (cache) clock.lap("cache store");
  auto note_damage = [&] {
    if (cache && cache->damaged_rows() > 0 && r.cache_note.empty())
      r.cache_note = std::to_string(cache->damaged_rows()) +
                     " damaged cache rows were ignored (checksum); their files were read again";
  };
  note_damage();
  r.masks = pair_masks(r.records, settings.masks);
  clock.lap("masks");
  r.labels = assign_labels(r.records, r.masks.layout_roots);
  clock.lap("labels");
  GroupSettings gs = settings.groups;
  gs.threads = settings.read.threads;
  // An unchanged set (same records, kinds and bytes, same settings) reuses its groups.
  uint64_t fingerprint = 0;
  std::optional<GroupResult> cached_groups;
  if (cache) {
    XXH3_state_t* st = XXH3_createState();
    XXH3_64bits_reset(st);
    const double corr = gs.match.min_correlation;
    XXH3_64bits_update(st, &kMatchRules, sizeof kMatchRules);  // groups by older rules are not reused
    XXH3_64bits_update(st, &kGroupsFormat, sizeof kGroupsFormat);  // nor groups stored without their links
    XXH3_64bits_update(st, &gs.radius, sizeof gs.radius);
    XXH3_64bits_update(st, &corr, sizeof corr);
    const double local = gs.match.max_local, chroma = gs.match.max_chroma, fit_floor = gs.match.fit_floor;
    XXH3_64bits_update(st, &local, sizeof local);
    XXH3_64bits_update(st, &chroma, sizeof chroma);
    XXH3_64bits_update(st, &fit_floor, sizeof fit_floor);
    for (const auto& rec : r.records) {
      XXH3_64bits_update(st, rec.path.data(), rec.path.size() + 1);
      XXH3_64bits_update(st, &rec.kind, sizeof rec.kind);
      XXH3_64bits_update(st, rec.features.content_hash.data(), sizeof rec.features.content_hash);
    }
    fingerprint = XXH3_64bits_digest(st);
    XXH3_freeState(st);
    cached_groups = cache->load_groups(fingerprint, r.records.size());
  }
  if (cached_groups) {
    r.groups = std::move(*cached_groups);
    // The outputs show the thumbnails of group members and of masked images.
    std::vector<uint32_t> shown;
    for (const auto& g : r.groups.groups) shown.insert(shown.end(), g.members.begin(), g.members.end());
    for (uint32_t i = 0; i < r.records.size(); ++i)
      if (r.masks.mask_of[i] >= 0) {
        shown.push_back(i);
        shown.push_back(static_cast<uint32_t>(r.masks.mask_of[i]));
      }
    load_thumbnails(shown);
  } else {
    std::vector<uint32_t> all;
    for (uint32_t i = 0; i < r.records.size(); ++i)
      if (thumbnail_row[i] >= 0) all.push_back(i);
    load_thumbnails(all);
    // The listing's last use was re-reading files whose thumbnails had gone; its
    // entries (about 110 bytes a file) are not held through the join.
    r.walk.files.clear();
    r.walk.files.shrink_to_fit();
    r.groups = find_groups(r.records, r.thumbs, gs);
    if (cache) {
      try {
        cache->store_groups(fingerprint, r.groups);
      } catch (const std::exception& e) {
        r.cache_note = std::string("the cache could not be updated: ") + e.what();
      }
    }
  }
  note_damage();
  if (cache && cache->set_aside_after_damage())
    r.cache_note = "the cache file was damaged; it was moved aside, and the next run starts a new one";
  clock.lap(cached_groups ? "groups (cached)" : "groups");
  // Every thumbnail an output shows is loaded now; the others stay in the cache.
  r.walk.files.clear();  // (already, unless the groups came from the cache)
  r.walk.files.shrink_to_fit();
  for (const auto& rec : r.records) {
    ++r.totals.files_seen;
    switch (rec.kind) {
      case FileKind::image: ++r.totals.images; break;
      case FileKind::mask: ++r.totals.masks; break;
      case FileKind::unreadable: ++r.totals.unreadable; break;
      case FileKind::ignored: ++r.totals.ignored; break;
    }
  }
  return r;
}

AuditResult place(AuditIndex index, const PlaceOptions& opt) {
  AuditResult r;
  static_cast<AuditIndex&>(r) = std::move(index);
  r.settings.split = opt.split;
  r.settings.checks = opt.policy.thresholds;
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
  try {
    check_inventory(r.records, r.labels, r.walk, r.findings);
    check_masks(r.records, r.masks, r.findings);
    check_groups(r.records, r.labels, r.groups, r.settings.groups, r.findings);
    check_images(r.records, r.labels, r.settings.checks, r.findings);
    check_labels(r.records, r.labels, r.walk, r.settings.checks, r.findings);
  } catch (...) {
    if (splitter.joinable()) splitter.join();
    throw;
  }
  if (splitter.joinable()) splitter.join();
  if (split_error) std::rethrow_exception(split_error);
  check_split(r.records, r.labels, r.split, split, keep_folders, r.findings);
  clock.lap("checks + split");

  // Policy, then order, then the baseline's verdict per finding.
  apply_policy(opt.policy, r.totals.unreadable, r.totals.images + r.totals.unreadable, r.findings);
  sort_findings(r.findings);
  r.known.assign(r.findings.size(), false);
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
  opt.policy.thresholds = index.settings.checks;
  opt.keep = keep;
  return place(std::move(index), opt);
}

AuditResult run_audit(const AuditSettings& settings) { return place(read_tree(settings), settings.split); }

int policy_exit_status(const AuditResult& result) {
  for (size_t k = 0; k < result.findings.size(); ++k)
    if (breaks_policy(result.findings[k].severity, result.known[k], result.fail_on_new_only)) return 1;
  return 0;
}

}  // namespace tamis
