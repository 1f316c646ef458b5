#include "tamis/read/tree_reader.h"

#include <exception>
#include <utility>

#include <xxhash.h>

#include "tamis/read/cache.h"
#include "tamis/version.h"

namespace tamis {

std::string reading_key(const ReadOptions& options) {
  const DecodeLimits& d = options.decode;
  return std::string(kToolVersion) + "|" + std::to_string(d.max_pixels) + "|" + std::to_string(d.reduced_side) + "|" +
         std::to_string(options.max_bytes) + "|" + std::to_string(d.max_image_bytes) + "|" +
         std::to_string(d.block_above_pixels) + "|" + std::to_string(kDecodeRules);
}

TreeReader::TreeReader(std::filesystem::path root, ReadOptions options, std::filesystem::path cache_file)
    : root_(std::move(root)), options_(std::move(options)), cache_file_(std::move(cache_file)) {
  if (cache_file_.empty()) return;
  // The cache loads on a thread of its own while the tree is listed.
  loader_ = std::thread([this] {
    const std::string key = reading_key(options_);
    try {
      cache_ = std::make_unique<RecordCache>(cache_file_, root_, key);
      if (cache_->rebuilt()) note_ = "the cache file was damaged; it was moved aside and rebuilt";
    } catch (const std::exception& e) {
      note_ = std::string("the cache cannot be used: ") + e.what();
    }
  });
}

TreeReader::~TreeReader() {
  if (loader_.joinable()) loader_.join();
}

WalkResult TreeReader::walk(StageClock& clock, Shard shard) {
  WalkResult w;
  try {
    w = walk_tree(root_, options_.threads, false);
  } catch (...) {
    if (loader_.joinable()) loader_.join();
    throw;
  }
  keep_shard(w, shard);  // before any file is stat'ed: a shard's walk stats only its own
  if (loader_.joinable()) loader_.join();
  // Files are stat'ed only when stored records may match them (otherwise every
  // file is opened anyway, and stamped from its descriptor).
  if (cache_ && cache_->rows() > 0) stamp_files(root_, w, options_.threads);
  clock.lap(cache_file_.empty() ? "walk" : "walk + cache load");
  return w;
}

std::vector<FileRecord> TreeReader::read(const WalkResult& walk, ThumbnailTable& thumbs, ReadCounts& counts,
                                         StageClock& clock) {
  walk_ = &walk;
  counts_ = &counts;
  ReadContext ctx;
  ctx.cache = cache_.get();
  ctx.counts = &counts;
  ctx.thumbnail_row = &thumbnail_row_;
  std::vector<uint32_t> by_content;  // records reused by content hash: stored anew below
  ctx.by_content = &by_content;
  ctx.thumbs = &thumbs;
  std::vector<FileRecord> records = read_files(root_, walk.files, options_, ctx);
  clock.lap("read");
  if (!cache_) return records;
  // A record reused by content (a touched, rewritten, copied or moved file) is
  // stored anew, under its own path and stamp: with its thumbnail, loaded first.
  load_thumbnails(records, thumbs, by_content);
  try {
    cache_->store(records, thumbs);  // as read, before mask pairing changes kinds
  } catch (const std::exception& e) {
    note_ = std::string("the cache could not be updated: ") + e.what();
  }
  clock.lap("cache store");
  return records;
}

std::optional<GroupResult> TreeReader::stored_groups(const std::vector<FileRecord>& records,
                                                     std::string_view groups_key) {
  if (!cache_) return std::nullopt;
  // An unchanged set (same records, kinds and bytes, same settings) reuses its groups.
  XXH3_state_t* st = XXH3_createState();
  XXH3_64bits_reset(st);
  XXH3_64bits_update(st, &kGroupsFormat, sizeof kGroupsFormat);  // groups stored in an older layout are not reused
  XXH3_64bits_update(st, groups_key.data(), groups_key.size());
  for (const auto& rec : records) {
    XXH3_64bits_update(st, rec.path.data(), rec.path.size() + 1);
    XXH3_64bits_update(st, &rec.kind, sizeof rec.kind);
    XXH3_64bits_update(st, rec.features.content_hash.data(), sizeof rec.features.content_hash);
  }
  fingerprint_ = XXH3_64bits_digest(st);
  XXH3_freeState(st);
  return cache_->load_groups(fingerprint_, records.size());
}

void TreeReader::store_groups(const GroupResult& groups) {
  if (!cache_) return;
  try {
    cache_->store_groups(fingerprint_, groups);
  } catch (const std::exception& e) {
    note_ = std::string("the cache could not be updated: ") + e.what();
  }
}

void TreeReader::load_thumbnails(std::vector<FileRecord>& records, ThumbnailTable& thumbs,
                                 const std::vector<uint32_t>& which) {
  if (!cache_ || which.empty()) return;
  std::vector<uint32_t> missing;
  try {
    missing = cache_->load_thumbnails(thumbs, thumbnail_row_, which);
  } catch (const std::exception& e) {
    missing = which;
    note_ = std::string("the cache could not be read: ") + e.what();
  }
  for (uint32_t i : which) thumbnail_row_[i] = -1;
  if (missing.empty()) return;
  // A file whose stored thumbnail has gone (another run changed the cache) is read again.
  std::vector<WalkEntry> again;
  for (uint32_t i : missing) again.push_back(walk_->files[i]);
  ReadOptions plain = options_;
  plain.on_progress = nullptr;
  ThumbnailTable fresh_thumbs;
  ReadContext ctx;
  ctx.thumbs = &fresh_thumbs;
  std::vector<FileRecord> fresh = read_files(root_, again, plain, ctx);
  thumbs.make_room(missing);
  Thumbnail thumb;
  for (size_t k = 0; k < missing.size(); ++k) {
    // Only the thumbnail is taken: the record stays as it is, with its kind, label
    // and mask pairing (decided after it was read: replacing it made a mask an
    // image again). A file that cannot be read any more (changed during the run)
    // is taken as read now, so that no readable image is left without a thumbnail.
    // (The fresh table may itself be in a scratch file, where at() may not be used.)
    if (fresh_thumbs.has(k) && fresh[k].kind == FileKind::image) {
      fresh_thumbs.get(k, thumb);
      thumbs.put(missing[k], thumb);
    } else {
      records[missing[k]] = std::move(fresh[k]);
    }
  }
  if (counts_) counts_->read += missing.size();
}

void TreeReader::load_all_thumbnails(std::vector<FileRecord>& records, ThumbnailTable& thumbs) {
  if (!cache_) return;
  std::vector<uint32_t> all;
  for (uint32_t i = 0; i < records.size(); ++i)
    if (thumbnail_row_[i] >= 0) all.push_back(i);
  load_thumbnails(records, thumbs, all);
}

std::string TreeReader::note() const {
  std::string n = note_;
  if (cache_ && cache_->damaged_rows() > 0 && n.empty())
    n = std::to_string(cache_->damaged_rows()) +
        " damaged cache rows were ignored (checksum); their files were read again";
  if (cache_ && cache_->set_aside_after_damage())
    n = "the cache file was damaged; it was moved aside, and the next run starts a new one";
  if (counts_ && !counts_->scratch_note.empty()) n += (n.empty() ? "" : "; ") + counts_->scratch_note;
  return n;
}

}  // namespace tamis
