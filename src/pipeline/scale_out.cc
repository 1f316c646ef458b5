#include "tamis/pipeline/scale_out.h"

#include <algorithm>
#include <map>
#include <queue>
#include <set>

#include <xxhash.h>

#include "tamis/read/tree_reader.h"
#include "tamis/version.h"

namespace tamis {

namespace {

// What a join must share with the merge: the look-alike settings and the mask
// settings (mask pairing decides which images the join sees).
std::string join_settings_key(const GroupSettings& groups, const MaskSettings& masks) {
  std::string key = group_settings_key(groups);
  for (const auto* list : {&masks.force, &masks.forbid}) {
    key += '\x1f';
    for (const std::string& f : *list) key += f + '\0';
  }
  return key;
}

std::string list_shards(const std::vector<uint32_t>& v) {
  std::string s;
  for (size_t k = 0; k < v.size() && k < 20; ++k) s += (k ? ", " : "") + std::to_string(v[k]);
  if (v.size() > 20) s += ", ... (" + std::to_string(v.size()) + " in all)";
  return s;
}

// Checks that `index` of each item covers 0..count-1 exactly once; `what` names them.
template <typename Name>
void check_cover(uint32_t count, const std::vector<uint32_t>& index, const Name& name, const std::string& what,
                 const std::string& remedy) {
  std::vector<int64_t> seen(count, -1);
  for (size_t k = 0; k < index.size(); ++k) {
    if (seen[index[k]] >= 0)
      throw MergeError(what + " " + std::to_string(index[k]) + " of " + std::to_string(count) + " is given twice (" +
                       name(static_cast<size_t>(seen[index[k]])) + " and " + name(k) + ")");
    seen[index[k]] = static_cast<int64_t>(k);
  }
  std::vector<uint32_t> missing;
  for (uint32_t k = 0; k < count; ++k)
    if (seen[k] < 0) missing.push_back(k);
  if (!missing.empty())
    throw MergeError(std::string(missing.size() == 1 ? what + " " : what + "s ") + list_shards(missing) + " of " +
                     std::to_string(count) + (missing.size() == 1 ? " is" : " are") + " missing: " + remedy);
}

}  // namespace

ScanPart scan_tree(const TreeSettings& settings, Shard shard, std::vector<StageTime>* times) {
  std::vector<StageTime> own;
  StageClock clock(times ? times : &own);
  ScanPart p;
  p.root = settings.root.string();
  p.decode = settings.read.decode;
  p.max_bytes = settings.read.max_bytes;
  p.read_key = reading_key(settings.read);
  p.tool = kToolVersion;
  p.shard = shard;
  TreeReader reader(settings.root, settings.read, settings.cache_file);
  p.walk = reader.walk(clock, shard);
  p.records = reader.read(p.walk, p.thumbs, p.counts, clock);
  reader.load_all_thumbnails(p.records, p.thumbs);  // the part carries every thumbnail
  p.note = reader.note();
  p.walk.files.clear();
  p.walk.files.shrink_to_fit();
  clock.lap("thumbnails");
  return p;
}

constexpr size_t kPartsKeptOpen = 64;

PartSet::PartSet(const std::vector<std::filesystem::path>& files) {
  if (files.empty()) throw MergeError("no parts were given");
  std::vector<std::unique_ptr<PartFile>> opened;
  for (const auto& f : files) {
    try {
      opened.push_back(std::make_unique<PartFile>(f));
      // Beyond a few parts, none holds a descriptor between reads (each read opens
      // and closes its file): a merge of thousands of parts stays within the
      // process's limit on open files (1,024 by default).
      if (files.size() > kPartsKeptOpen) opened.back()->release();
    } catch (const PartError& e) {
      throw MergeError(e.what());
    }
  }
  const ScanPart& a = opened.front()->info();
  for (const auto& p : opened) {
    const ScanPart& b = p->info();
    const std::string pair = opened.front()->file().string() + " and " + p->file().string();
    if (b.tool != a.tool)
      throw MergeError("parts from different tamis versions (" + a.tool + ", " + b.tool + "): " + pair +
                       "; scan every shard with one version");
    if (b.root != a.root)
      throw MergeError("parts of different ROOTs (" + a.root + ", " + b.root + "): " + pair);
    if (b.read_key != a.read_key)
      throw MergeError("parts read with different settings (--max-pixels, --image-memory-mb): " + pair);
    if (b.shard.count != a.shard.count)
      throw MergeError("parts of scans in " + std::to_string(a.shard.count) + " and " + std::to_string(b.shard.count) +
                       " shards: " + pair);
  }
  std::vector<uint32_t> index;
  for (const auto& p : opened) index.push_back(p->info().shard.index);
  check_cover(a.shard.count, index, [&](size_t k) { return opened[k]->file().string(); }, "shard",
              "give every part of the scan (tamis scan ROOT --shard K/N for each K)");
  parts_.resize(opened.size());
  for (auto& p : opened) {
    const uint32_t k = p->info().shard.index;
    parts_[k] = std::move(p);
  }
  // The set's key: every part's first checksum, in shard order.
  std::vector<uint64_t> sums;
  for (const auto& p : parts_) sums.push_back(p->head_checksum());
  key_ = XXH3_64bits(sums.data(), sums.size() * sizeof(uint64_t));
  // Records in path order, each with its part and thumbnail: a k-way merge of
  // the parts' records, read one at a time (shards are disjoint, so no path
  // comes twice), so that the records are held once.
  uint64_t total = 0;
  for (const auto& p : parts_) total += p->records();
  records_.reserve(total);
  part_of_.reserve(total);
  thumb_of_.reserve(total);
  try {
    std::vector<std::unique_ptr<PartFile::RecordReader>> readers;
    std::vector<FileRecord> head(parts_.size());
    using Item = std::pair<const std::string*, uint32_t>;  // the part's next path, the part
    auto later = [](const Item& x, const Item& y) { return *x.first > *y.first; };
    std::priority_queue<Item, std::vector<Item>, decltype(later)> next(later);
    for (uint32_t q = 0; q < parts_.size(); ++q) {
      readers.push_back(std::make_unique<PartFile::RecordReader>(*parts_[q]));
      if (readers[q]->next(head[q])) next.push({&head[q].path, q});
    }
    while (!next.empty()) {
      const uint32_t q = next.top().second;
      next.pop();
      records_.push_back(std::move(head[q]));
      part_of_.push_back(q);
      const int64_t t = readers[q]->thumbnail();
      thumb_of_.push_back(t < 0 ? UINT32_MAX : static_cast<uint32_t>(t));
      if (readers[q]->next(head[q])) next.push({&head[q].path, q});
    }
  } catch (const PartError& e) {
    throw MergeError(e.what());
  }
  // The walk's lists, merged (each part's is sorted; shards are disjoint).
  for (const auto& p : parts_) {
    const WalkResult& w = p->info().walk;
    walk_.links.insert(walk_.links.end(), w.links.begin(), w.links.end());
    walk_.special.insert(walk_.special.end(), w.special.begin(), w.special.end());
    walk_.unreadable_dirs.insert(walk_.unreadable_dirs.end(), w.unreadable_dirs.begin(), w.unreadable_dirs.end());
    walk_.dirs.insert(walk_.dirs.end(), w.dirs.begin(), w.dirs.end());
    const ReadCounts& c = p->info().counts;
    counts_.read += c.read;
    counts_.cached += c.cached;
    counts_.cached_by_hash += c.cached_by_hash;
    counts_.moved += c.moved;
    if (!p->info().note.empty())
      note_ += (note_.empty() ? "" : "; ") + ("shard " + to_string(p->info().shard) + ": " + p->info().note);
  }
  for (auto* list : {&walk_.links, &walk_.special, &walk_.unreadable_dirs, &walk_.dirs}) std::sort(list->begin(), list->end());
}

void PartSet::verify() const {
  for (const auto& p : parts_) {
    try {
      p->verify();
    } catch (const PartError& e) {
      throw MergeError(e.what());
    }
  }
}

void PartSet::read_thumbnails(const uint32_t* which, size_t count, Thumbnail* out) const {
  // Per part, the thumbnails asked for (ascending, as `which` is), read in runs.
  std::vector<std::vector<std::pair<uint32_t, size_t>>> asked(parts_.size());  // (thumbnail, place in out)
  for (size_t k = 0; k < count; ++k) {
    const uint32_t i = which[k];
    if (i >= thumb_of_.size() || thumb_of_[i] == UINT32_MAX) throw std::logic_error("PartSet: a record without a thumbnail");
    asked[part_of_[i]].push_back({thumb_of_[i], k});
  }
  std::vector<Thumbnail> buf;
  for (size_t q = 0; q < parts_.size(); ++q) {
    const auto& a = asked[q];
    for (size_t s = 0; s < a.size();) {
      size_t e = s + 1;
      while (e < a.size() && a[e].first == a[e - 1].first + 1 && e - s < 4096) ++e;
      buf.resize(e - s);
      try {
        parts_[q]->read_thumbnails(a[s].first, e - s, buf.data());
      } catch (const PartError& err) {
        throw MergeError(err.what());
      }
      for (size_t k = s; k < e; ++k) out[a[k].second] = buf[k - s];
      s = e;
    }
  }
}

void PartSet::load_thumbnails(const std::vector<uint32_t>& which, ThumbnailTable& into) const {
  constexpr size_t kBlock = 16384;
  std::vector<Thumbnail> block;
  for (size_t first = 0; first < which.size(); first += kBlock) {
    const size_t count = std::min(kBlock, which.size() - first);
    block.resize(count);
    read_thumbnails(which.data() + first, count, block.data());
    for (size_t k = 0; k < count; ++k) into.put(which[first + k], block[k]);
  }
}

JoinSlice join_parts(PartSet& parts, const TreeSettings& settings, Shard slice) {
  JoinSlice s;
  s.tool = kToolVersion;
  s.slice = slice;
  GroupSettings gs = settings.groups;
  gs.threads = settings.read.threads;
  s.groups_key = join_settings_key(gs, settings.masks);
  s.parts_key = parts.key();
  s.records = parts.records().size();
  // The join sees what the merge's join sees: the images left after mask pairing.
  pair_masks(parts.records(), settings.masks);
  s.links = join_lookalike_slice(parts.records(), gs, slice.index, slice.count,
                                 [&](const uint32_t* which, size_t count, Thumbnail* out) {
                                   parts.read_thumbnails(which, count, out);
                                 });
  return s;
}

AuditIndex merge_parts(PartSet parts, const std::vector<JoinSlice>& joins, const TreeSettings& settings) {
  AuditIndex r;
  StageClock clock(&r.times);
  r.settings = settings;
  r.settings.root = parts.root();
  r.settings.read.decode = parts.first().decode;
  r.settings.read.max_bytes = parts.first().max_bytes;
  r.settings.read.on_progress = nullptr;
  r.settings.cache_file.clear();
  GroupSettings gs = settings.groups;
  gs.threads = settings.read.threads;
  // Join outputs first (cheap to check), then every part's bytes.
  if (!joins.empty()) {
    const std::string key = join_settings_key(gs, settings.masks);
    std::vector<uint32_t> index;
    for (const JoinSlice& j : joins) {
      const std::string which = "join output " + to_string(j.slice);
      if (j.tool != parts.first().tool)
        throw MergeError(which + " was made by tamis " + j.tool + ", the parts by " + parts.first().tool);
      if (j.parts_key != parts.key() || j.records != parts.records().size())
        throw MergeError(which + " was computed from other parts than these (scan and join again, or give its parts)");
      if (j.groups_key != key)
        throw MergeError(which + " was made with other look-alike or mask settings than this merge's "
                         "(give merge the same --policy, --mask-folder and --not-mask-folder as the join)");
      if (j.slice.count != joins.front().slice.count)
        throw MergeError("join outputs of joins in " + std::to_string(joins.front().slice.count) + " and " +
                         std::to_string(j.slice.count) + " slices");
      index.push_back(j.slice.index);
    }
    check_cover(joins.front().slice.count, index,
                [&](size_t k) { return "join output " + to_string(joins[k].slice); }, "join slice",
                "give every slice's output (tamis join PART... --slice K/N for each K)");
  }
  parts.verify();
  clock.lap("parts checked");
  r.records = std::move(parts.records());
  r.walk = std::move(parts.walk());
  r.counts = parts.counts();
  r.cache_note = parts.note();
  pair_and_label(r, clock);
  const size_t n = r.records.size();
  std::vector<uint32_t> with_thumb;
  for (uint32_t i = 0; i < n; ++i)
    if (r.records[i].features.has_lookalike) with_thumb.push_back(i);
  if (joins.empty()) {
    // Every thumbnail, in memory or (beyond the budget) in a scratch file, as the read stage keeps them.
    std::string note;
    if (!assign_scratch_thumbnails(r.thumbs, n, r.settings.root, settings.read, note)) r.thumbs.assign_all(n);
    if (!note.empty()) r.cache_note += (r.cache_note.empty() ? "" : "; ") + note;
    parts.load_thumbnails(with_thumb, r.thumbs);
    clock.lap("thumbnails");
    r.groups = find_groups(r.records, r.thumbs, gs);
    clock.lap("groups");
  } else {
    LookalikeLinks all;
    for (const JoinSlice& j : joins) {
      all.links.insert(all.links.end(), j.links.links.begin(), j.links.links.end());
      all.candidate_hits += j.links.candidate_hits;
    }
    try {
      r.groups = groups_from_links(r.records, std::move(all));
    } catch (const std::invalid_argument& e) {
      throw MergeError(std::string("the join outputs do not fit these parts: ") + e.what());
    }
    clock.lap("groups (from the join)");
    r.thumbs.assign_none(n);
  }
  // The thumbnails the outputs show, in memory; the others freed.
  std::vector<uint32_t> shown = shown_records(r);
  std::sort(shown.begin(), shown.end());
  shown.erase(std::unique(shown.begin(), shown.end()), shown.end());
  std::erase_if(shown, [&](uint32_t i) { return !r.records[i].features.has_lookalike; });
  if (!joins.empty()) {
    r.thumbs.make_room(shown);
    parts.load_thumbnails(shown, r.thumbs);
  }
  r.thumbs.keep_only(shown);
  count_totals(r);
  return r;
}

}  // namespace tamis
