#include "tamis/read/read_stage.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>
#include <xxhash.h>

#include <algorithm>
#include <atomic>
#include <map>
#include <cerrno>
#include <stdexcept>

#include "tamis/base/memory.h"
#include "tamis/base/parallel.h"
#include "tamis/read/cache.h"
#include "tamis/read/features.h"
#include "tamis/read/file_bytes.h"
#include "tamis/read/probe.h"

namespace tamis {

namespace {

struct Fd {
  int fd = -1;
  ~Fd() {
    if (fd >= 0) close(fd);
  }
};

void set_stamp(FileRecord& r, const struct stat& st) {
  r.size = static_cast<uint64_t>(st.st_size);
  r.mtime_ns = static_cast<int64_t>(st.st_mtim.tv_sec) * 1000000000LL + st.st_mtim.tv_nsec;
  r.inode = st.st_ino;
}

enum class Source { read, cached_by_hash, left_aside };  // (hits by path never reach read_one)

// `from_cache(row)`: a copy of the cached record of that row (a row another
// entry took is copied from that entry's record).
template <typename FromCache>
Source read_one(int rootfd, const WalkEntry& e, const ReadOptions& opt, const RecordCache* cache,
                std::vector<uint8_t>& buf, FileRecord& r, Thumbnail* thumb, const FromCache& from_cache) {
  r.path = e.path;
  r.size = e.size;
  r.mtime_ns = e.mtime_ns;
  r.inode = e.inode;
  auto unreadable = [&](Defect d) {
    r.kind = FileKind::unreadable;
    r.defect = d;
  };
  if (is_hidden_path(e.path)) {
    r.kind = FileKind::ignored;
    r.defect = Defect::hidden;
    struct stat st {};
    if (!e.stamped && fstatat(rootfd, e.path.c_str(), &st, AT_SYMLINK_NOFOLLOW) == 0) set_stamp(r, st);
    return Source::left_aside;  // never opened: not counted as read
  }
  bool image_name = format_from_extension(e.path) != Format::unknown || has_other_image_extension(e.path);
  // A file the walk did not stat is stamped from its open descriptor.
  Fd f;
  bool opened = true;
  if (!e.stamped) {
    f.fd = open_data_file(rootfd, e.path);
    struct stat st {};
    opened = f.fd >= 0 && fstat(f.fd, &st) == 0 && S_ISREG(st.st_mode);
    if (opened) set_stamp(r, st);
  }
  if (opened && r.size > opt.max_bytes) {
    if (image_name) {
      unreadable(Defect::too_many_bytes);
      return Source::read;
    }
    r.kind = FileKind::ignored;
    r.defect = Defect::not_an_image;
    return Source::read;
  }
  if (opened && f.fd < 0) f.fd = open_data_file(rootfd, e.path);
  if (!opened || !read_whole(f.fd, r.size, buf)) {
    // A file we cannot read is only "ours" if it claims to be an image.
    if (image_name) {
      unreadable(Defect::io_error);
      return Source::read;
    }
    r.kind = FileKind::ignored;
    r.defect = Defect::not_an_image;
    return Source::read;
  }
  std::span<const uint8_t> bytes(buf.data(), buf.size());
  ProbeOutcome p = probe_bytes(bytes);
  r.probe = p.info;
  if (p.defect == Defect::unknown_format) {
    if (!image_name) {
      r.kind = FileKind::ignored;
      r.defect = Defect::not_an_image;
      return Source::read;
    }
    unreadable(bytes.empty() ? Defect::empty_file
               : has_other_image_extension(e.path) ? Defect::no_decoder
                                                   : Defect::unknown_format);
    return Source::read;
  }
  XXH128_hash_t h = XXH3_128bits(bytes.data(), bytes.size());
  r.features.content_hash = {h.high64, h.low64};
  r.features.has_content_hash = true;
  if (cache) {  // the same bytes under another name: reuse, do not decode
    if (int64_t row = cache->row_with_content(r.features.content_hash, r.size); row >= 0) {
      FileRecord copy = from_cache(static_cast<size_t>(row));
      copy.path = e.path;
      copy.size = r.size;
      copy.mtime_ns = r.mtime_ns;
      copy.inode = r.inode;
      r = std::move(copy);
      return Source::cached_by_hash;
    }
  }
  if (p.defect != Defect::none) {
    unreadable(p.defect);
    return Source::read;
  }
  Decoded d = decode_image(bytes, r.probe, opt.decode);
  if (d.defect != Defect::none) {
    unreadable(d.defect);
    return Source::read;
  }
  const Lookalike look = lookalike_features(d.reduced);
  r.features.look = look;
  if (thumb) *thumb = look.thumb;
  r.features.stats = image_stats(d.reduced, d.alpha_min);
  r.features.stats.distinct = d.distinct;
  r.features.has_lookalike = true;
  r.kind = FileKind::image;
  return Source::read;
}

constexpr size_t kSpillWindow = 16384;  // records whose thumbnails are staged at once (19 MB)

}  // namespace

bool assign_scratch_thumbnails(ThumbnailTable& thumbs, size_t records, const std::filesystem::path& root,
                               const ReadOptions& opt, std::string& note) {
  note.clear();
  if (opt.scratch_dir.empty() || static_cast<uint64_t>(records) * sizeof(Thumbnail) <= opt.thumbnail_memory_bytes)
    return false;
  // The scratch folder must exist and not be ROOT or inside it: nothing is written in the data set.
  std::error_code ec;
  if (!std::filesystem::is_directory(opt.scratch_dir, ec) || path_is_inside(root, opt.scratch_dir)) return false;
  try {
    thumbs.assign_spilled(records, opt.scratch_dir);
    return true;
  } catch (const std::runtime_error& e) {  // no space, read-only: memory gives the same values
    note = std::string("the thumbnails stayed in memory: ") + e.what();
    return false;
  }
}

bool is_hidden_path(std::string_view p) {
  size_t start = 0;
  while (start < p.size()) {
    if (p[start] == '.') return true;
    size_t slash = p.find('/', start);
    if (slash == std::string_view::npos) break;
    start = slash + 1;
  }
  return false;
}

std::vector<FileRecord> read_files(const std::filesystem::path& root, const std::vector<WalkEntry>& entries,
                                   const ReadOptions& opt, const ReadContext& ctx) {
  Fd rootfd{open(root.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC)};
  if (rootfd.fd < 0) throw std::runtime_error("cannot open folder " + root.string());
  std::vector<FileRecord> records;
  std::atomic<size_t> done{0};
  std::atomic<uint64_t> n_read{0}, n_cached{0}, n_hash{0};
  auto progress = [&] {
    size_t n = done.fetch_add(1, std::memory_order_relaxed) + 1;
    if (opt.on_progress) opt.on_progress(n, entries.size());
  };
  // First the files the cache knows by path, size, time and inode: their records
  // are moved out of it, the files are not opened.
  std::vector<int64_t> row_of(entries.size(), -1);
  std::vector<int64_t> entry_of_row;
  bool adopted = false;
  if (ctx.cache) {
    row_of = ctx.cache->match(entries);
    bool one_to_one = ctx.cache->rows() == entries.size();
    for (size_t i = 0; i < entries.size() && one_to_one; ++i) one_to_one = row_of[i] == static_cast<int64_t>(i);
    entry_of_row.assign(ctx.cache->rows(), -1);
    for (size_t i = 0; i < entries.size(); ++i) {
      if (is_hidden_path(entries[i].path)) row_of[i] = -1;  // hidden files are never trusted to the cache
      if (row_of[i] >= 0) entry_of_row[static_cast<size_t>(row_of[i])] = static_cast<int64_t>(i);
    }
    if (one_to_one) {  // an unchanged tree: the cache's table becomes the result, no record is copied
      records = ctx.cache->take_all();
      adopted = true;
      for (size_t i = 0; i < entries.size(); ++i)
        if (row_of[i] >= 0) {
          ++n_cached;
          progress();
        }
    }
  }
  if (!adopted) {
    reserve_huge(records, entries.size());
    records.resize(entries.size());
    if (ctx.cache)
      parallel_for(entries.size(), opt.threads, [&](size_t i) {
        if (row_of[i] < 0) return;
        records[i] = ctx.cache->take(static_cast<size_t>(row_of[i]));
        n_cached.fetch_add(1, std::memory_order_relaxed);
        progress();
      }, 256);
  }
  // Then every other file is read (each with a thumbnail slot). A content match
  // whose row was taken above is copied from the record it went to.
  if (ctx.thumbs) {
    std::vector<uint32_t> to_read;
    for (size_t i = 0; i < entries.size(); ++i)
      if (row_of[i] < 0) to_read.push_back(static_cast<uint32_t>(i));
    // Judged on every record (a later stage may load all the stored ones too).
    std::string note;
    const bool spill = assign_scratch_thumbnails(*ctx.thumbs, entries.size(), root, opt, note);
    if (ctx.counts) ctx.counts->scratch_note = note;
    if (!spill) {
      if (to_read.size() == entries.size()) {
        ctx.thumbs->assign_all(entries.size(), false);  // every slot is written below, by its thread
      } else {
        ctx.thumbs->assign_none(entries.size());
        ctx.thumbs->make_room(to_read);
      }
    }
  }
  std::vector<int64_t> copied_row(ctx.cache ? entries.size() : 0, -1);  // rows copied by content
  auto from_cache = [&](size_t row) {
    return ctx.cache->taken(row) ? records[static_cast<size_t>(entry_of_row[row])] : ctx.cache->copy(row);
  };
  // Into a spilled table (a scratch file) the thumbnails go a window of records
  // at a time: made in memory, then written in one piece.
  const bool spilled = ctx.thumbs && ctx.thumbs->spilled();
  const size_t window = spilled ? kSpillWindow : std::max<size_t>(entries.size(), 1);
  std::vector<Thumbnail> staged(spilled ? std::min(window, entries.size()) : 0);
  for (size_t first = 0; first < entries.size(); first += window) {
    const size_t count = std::min(window, entries.size() - first);
    parallel_for(count, opt.threads, [&](size_t d) {
      const size_t i = first + d;
      if (row_of[i] >= 0) {
        if (spilled) staged[d].fill(0);  // a stored record's slot: its thumbnail is loaded later
        return;
      }
      Thumbnail* thumb = !ctx.thumbs ? nullptr : spilled ? &staged[d] : &ctx.thumbs->at(i);
      if (thumb) thumb->fill(0);  // stays zeros unless the file is an image
      thread_local std::vector<uint8_t> buf;
      if (adopted) records[i] = FileRecord{};  // it held the stored record of a hidden file
      Source src = read_one(rootfd.fd, entries[i], opt, ctx.cache, buf, records[i], thumb, [&](size_t row) {
        copied_row[i] = static_cast<int64_t>(row);
        return from_cache(row);
      });
      if (src != Source::left_aside) (src == Source::cached_by_hash ? n_hash : n_read)++;
      if (buf.capacity() > (64u << 20)) std::vector<uint8_t>().swap(buf);  // do not pin huge buffers
      progress();
    }, 8);
    if (spilled) ctx.thumbs->put_range(first, count, staged.data());
  }
  uint64_t moved = 0;
  if (ctx.cache) {
    // Files moved or renamed: per content, the new paths (content matches under a
    // path no row has) that stored paths gone from the tree can account for. A copy
    // (its source still there) and a touched or rewritten file did not move.
    auto listed = [&](const std::string& p) {
      auto it = std::lower_bound(entries.begin(), entries.end(), p,
                                 [](const WalkEntry& e, const std::string& q) { return e.path < q; });
      return it != entries.end() && it->path == p;
    };
    std::map<int64_t, std::pair<uint64_t, size_t>> new_paths;  // by the content's first row: count, an entry
    for (size_t i = 0; i < entries.size(); ++i) {
      if (copied_row[i] < 0) continue;
      if (ctx.by_content) ctx.by_content->push_back(static_cast<uint32_t>(i));
      if (!ctx.cache->has_path(entries[i].path)) {
        auto& [count, entry] = new_paths.try_emplace(copied_row[i], 0, i).first->second;
        ++count;
      }
    }
    for (const auto& [row, seen] : new_paths) {
      const auto& [n, entry] = seen;
      const FileRecord& r = records[entry];
      uint64_t gone = 0;
      for (size_t k : ctx.cache->rows_with_content(r.features.content_hash, r.size)) gone += !listed(ctx.cache->path_of(k));
      moved += std::min(n, gone);
    }
  }
  if (ctx.thumbnail_row) {
    ctx.thumbnail_row->assign(entries.size(), -1);
    for (size_t i = 0; i < entries.size(); ++i) {
      const int64_t row = row_of[i] >= 0 ? row_of[i] : (ctx.cache ? copied_row[i] : -1);
      if (row >= 0 && records[i].features.has_lookalike) (*ctx.thumbnail_row)[i] = row;
    }
  }
  if (ctx.counts) {
    ctx.counts->read = n_read.load();
    ctx.counts->cached = n_cached.load();
    ctx.counts->cached_by_hash = n_hash.load();
    ctx.counts->moved = moved;
  }
  return records;
}

}  // namespace tamis
