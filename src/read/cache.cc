#include "tamis/model/cbor_reader.h"
#include "tamis/read/cache.h"

#include <sqlite3.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <numeric>
#include <span>
#include <string_view>
#include <stdexcept>

#include <nlohmann/json.hpp>
#include <xxhash.h>

#include "tamis/base/memory.h"
#include "tamis/model/record_codec.h"

namespace tamis {

using nlohmann::json;

namespace {

// SQLite found the file damaged (or not a database at all): it is moved aside and rebuilt.
struct Damaged : std::runtime_error {
  using std::runtime_error::runtime_error;
};

[[noreturn]] void fail(sqlite3* db, int rc) {
  std::string msg = std::string("cache: ") + (db ? sqlite3_errmsg(db) : sqlite3_errstr(rc));
  const int primary = rc & 0xff;
  if (primary == SQLITE_CORRUPT || primary == SQLITE_NOTADB) throw Damaged(msg);
  throw std::runtime_error(msg);
}

struct Stmt {
  sqlite3* db;
  sqlite3_stmt* s = nullptr;
  Stmt(sqlite3* h, const char* sql) : db(h) {
    int rc = sqlite3_prepare_v2(db, sql, -1, &s, nullptr);
    if (rc != SQLITE_OK) fail(db, rc);
  }
  ~Stmt() { sqlite3_finalize(s); }
  // True for a row, false when done; throws on an error.
  bool step() {
    int rc = sqlite3_step(s);
    if (rc == SQLITE_ROW) return true;
    if (rc == SQLITE_DONE) return false;
    fail(db, rc);
  }
  void run() {
    while (step()) {
    }
  }
};

// Every stored blob ends with 8 bytes: XXH3-64 of the blob, seeded with a hash of
// what identifies it (the path and the stamp, or the root and fingerprint), so
// that damage anywhere in a row, or a row moved to another key, is seen when it
// is read and the row is treated as absent (its file is read again).
constexpr size_t kSumBytes = 8;
uint64_t row_seed(std::string_view key, uint64_t a = 0, uint64_t b = 0, uint64_t c = 0) {
  const uint64_t parts[3] = {a, b, c};
  return XXH3_64bits_withSeed(parts, sizeof parts, XXH3_64bits(key.data(), key.size()));
}
void append_sum(std::vector<uint8_t>& data, uint64_t seed) {
  const uint64_t h = XXH3_64bits_withSeed(data.data(), data.size(), seed);
  for (int k = 0; k < 8; ++k) data.push_back(static_cast<uint8_t>(h >> (8 * k)));
}
// The blob without its checksum, or an empty span when the checksum is wrong.
std::span<const uint8_t> checked(std::span<const uint8_t> data, uint64_t seed, bool& damaged) {
  if (data.size() < kSumBytes) {
    damaged = true;
    return {};
  }
  const auto body = data.first(data.size() - kSumBytes);
  uint64_t h = 0;
  for (int k = 0; k < 8; ++k) h |= uint64_t{data[body.size() + size_t(k)]} << (8 * k);
  if (h != XXH3_64bits_withSeed(body.data(), body.size(), seed)) {
    damaged = true;
    return {};
  }
  return body;
}

std::span<const uint8_t> blob(sqlite3_stmt* s, int col) {
  const auto* p = static_cast<const uint8_t*>(sqlite3_column_blob(s, col));
  return p ? std::span<const uint8_t>(p, static_cast<size_t>(sqlite3_column_bytes(s, col))) : std::span<const uint8_t>();
}

std::string meta_value(sqlite3* db, const char* key) {
  Stmt q(db, "SELECT value FROM meta WHERE key = ?");
  sqlite3_bind_text(q.s, 1, key, -1, SQLITE_STATIC);
  if (q.step()) {
    const auto* t = sqlite3_column_text(q.s, 0);
    return t ? reinterpret_cast<const char*>(t) : "";
  }
  return "";
}

void set_meta(sqlite3* db, const char* key, const std::string& value) {
  Stmt q(db, "INSERT OR REPLACE INTO meta(key, value) VALUES(?, ?)");
  sqlite3_bind_text(q.s, 1, key, -1, SQLITE_STATIC);
  sqlite3_bind_text(q.s, 2, value.c_str(), -1, SQLITE_TRANSIENT);
  q.run();
}

}  // namespace

struct RecordCache::Db {
  sqlite3* h = nullptr;
  ~Db() { close(); }
  void close() {
    if (h) sqlite3_close(h);
    h = nullptr;
  }
  void exec(const char* sql) {
    char* err = nullptr;
    int rc = sqlite3_exec(h, sql, nullptr, nullptr, &err);
    sqlite3_free(err);
    if (rc != SQLITE_OK) fail(h, rc);
  }
};

std::filesystem::path default_cache_file() {
  const char* xdg = std::getenv("XDG_CACHE_HOME");
  std::filesystem::path base;
  if (xdg && *xdg) {
    base = xdg;
  } else {
    const char* home = std::getenv("HOME");
    base = std::filesystem::path(home && *home ? home : "/tmp") / ".cache";
  }
  return base / "tamis" / "records.sqlite";
}

RecordCache::RecordCache(const std::filesystem::path& file, const std::filesystem::path& root,
                         const std::string& settings_key)
    : db_(std::make_unique<Db>()), file_(file) {
  std::error_code ec;
  if (file.has_parent_path()) std::filesystem::create_directories(file.parent_path(), ec);
  auto canonical = std::filesystem::weakly_canonical(root, ec);
  root_ = (ec ? std::filesystem::absolute(root) : canonical).string();
  try {
    open_and_load(settings_key);
  } catch (const Damaged&) {
    db_->close();
    std::filesystem::rename(file, file.string() + ".damaged-" + std::to_string(getpid()), ec);
    for (const char* suffix : {"-wal", "-shm"}) std::filesystem::remove(file.string() + suffix, ec);
    rebuilt_ = true;
    try {
      open_and_load(settings_key);
    } catch (const Damaged& e) {
      throw std::runtime_error(std::string("cannot rebuild ") + file.string() + ": " + e.what());
    }
  }
}

// Damage shows as SQLITE_CORRUPT or SQLITE_NOTADB on any statement here: the
// load reads every row of this root, so a damaged page it depends on is met.
void RecordCache::open_and_load(const std::string& settings_key) {
  paths_.clear();
  stamps_.clear();
  rows_.clear();
  by_content_.clear();
  int rc = sqlite3_open_v2(file_.c_str(), &db_->h, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE | SQLITE_OPEN_FULLMUTEX,
                           nullptr);
  if (rc != SQLITE_OK) {
    std::string msg = db_->h ? sqlite3_errmsg(db_->h) : sqlite3_errstr(rc);
    db_->close();
    throw std::runtime_error("cache: cannot open " + file_.string() + ": " + msg);
  }
  sqlite3_busy_timeout(db_->h, 30000);
  db_->exec("PRAGMA journal_mode=WAL");
  db_->exec("PRAGMA synchronous=NORMAL");
  db_->exec("CREATE TABLE IF NOT EXISTS meta(key TEXT PRIMARY KEY, value TEXT NOT NULL)");
  db_->exec("CREATE TABLE IF NOT EXISTS groups(root TEXT PRIMARY KEY, fingerprint TEXT NOT NULL, data BLOB NOT NULL)");
  db_->exec("CREATE TABLE IF NOT EXISTS records(root TEXT NOT NULL, path BLOB NOT NULL, size INTEGER NOT NULL,"
            " mtime INTEGER NOT NULL, inode INTEGER NOT NULL, data BLOB NOT NULL, PRIMARY KEY(root, path))");
  db_->exec("CREATE TABLE IF NOT EXISTS thumbs(root TEXT NOT NULL, path BLOB NOT NULL, data BLOB NOT NULL,"
            " PRIMARY KEY(root, path))");
  const std::string want = std::to_string(kCacheSchemaVersion) + "|" + settings_key;
  if (meta_value(db_->h, "version") != want) {
    db_->exec("BEGIN IMMEDIATE");
    db_->exec("DELETE FROM records");
    db_->exec("DELETE FROM thumbs");
    db_->exec("DELETE FROM groups");
    set_meta(db_->h, "version", want);
    db_->exec("COMMIT");
  }
  {  // room for every row first: a growing table would copy its records again and again
    Stmt count(db_->h, "SELECT count(*) FROM records WHERE root = ?");
    sqlite3_bind_text(count.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
    const size_t n = count.step() ? static_cast<size_t>(std::max<sqlite3_int64>(sqlite3_column_int64(count.s, 0), 0)) : 0;
    paths_.reserve(n);
    stamps_.reserve(n);
    reserve_huge(rows_, n);
  }
  Stmt q(db_->h, "SELECT path, size, mtime, inode, data FROM records WHERE root = ? ORDER BY path");
  sqlite3_bind_text(q.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
  while (q.step()) {
    FileRecord& r = rows_.emplace_back();
    auto p = blob(q.s, 0);
    bool bad = false;
    const auto body = checked(blob(q.s, 4), row_seed({reinterpret_cast<const char*>(p.data()), p.size()},
                                                     static_cast<uint64_t>(sqlite3_column_int64(q.s, 1)),
                                                     static_cast<uint64_t>(sqlite3_column_int64(q.s, 2)),
                                                     static_cast<uint64_t>(sqlite3_column_int64(q.s, 3))),
                              bad);
    if (bad || !detail::record_from_bytes(body, r)) {  // a damaged row, or one that does not decode, is a miss
      ++damaged_rows_;
      rows_.pop_back();
      continue;
    }
    paths_.emplace_back(p.begin(), p.end());
    stamps_.push_back({static_cast<uint64_t>(sqlite3_column_int64(q.s, 1)), sqlite3_column_int64(q.s, 2),
                       static_cast<uint64_t>(sqlite3_column_int64(q.s, 3))});
  }
  // SQLite orders BLOBs as memcmp does, like std::string; a file that says
  // otherwise is not trusted for the merge in match() and store().
  if (!std::is_sorted(paths_.begin(), paths_.end()) ||
      std::adjacent_find(paths_.begin(), paths_.end()) != paths_.end())
    throw Damaged("cache: rows out of order");
  taken_.assign(rows_.size(), 0);
  for (size_t k = 0; k < rows_.size(); ++k) {
    const auto& f = rows_[k].features;
    if (f.has_content_hash)
      by_content_.push_back({f.content_hash[0], f.content_hash[1], stamps_[k].size, static_cast<uint32_t>(k)});
  }
  std::sort(by_content_.begin(), by_content_.end());
}

std::vector<int64_t> RecordCache::match(const std::vector<WalkEntry>& entries) const {
  std::vector<int64_t> row(entries.size(), -1);
  size_t j = 0;
  for (size_t i = 0; i < entries.size(); ++i) {
    const auto& e = entries[i];
    if (i > 0 && !(entries[i - 1].path < e.path)) {  // not sorted: look it up alone
      auto it = std::lower_bound(paths_.begin(), paths_.end(), e.path);
      j = static_cast<size_t>(it - paths_.begin());
    }
    while (j < paths_.size() && paths_[j] < e.path) ++j;
    if (j < paths_.size() && paths_[j] == e.path && stamps_[j] == Stamp{e.size, e.mtime_ns, e.inode})
      row[i] = static_cast<int64_t>(j);
  }
  return row;
}

void RecordCache::identify(FileRecord& r, size_t k) const {
  r.path = paths_[k];
  r.size = stamps_[k].size;
  r.mtime_ns = stamps_[k].mtime_ns;
  r.inode = stamps_[k].inode;
}

FileRecord RecordCache::take(size_t k) {
  FileRecord r = std::move(rows_[k]);
  taken_[k] = 1;
  identify(r, k);
  return r;
}

std::vector<FileRecord> RecordCache::take_all() {
  std::vector<FileRecord> out = std::move(rows_);
  rows_.clear();  // every row is taken: copy() is never asked for one
  for (size_t k = 0; k < out.size(); ++k) identify(out[k], k);
  taken_.assign(out.size(), 1);
  return out;
}

FileRecord RecordCache::copy(size_t k) const {
  FileRecord r = rows_[k];
  identify(r, k);
  return r;
}

std::vector<uint32_t> RecordCache::load_thumbnails(ThumbnailTable& thumbs, const std::vector<int64_t>& source_row,
                                                   const std::vector<uint32_t>& which) {
  // Rows wanted, each with the records that take its thumbnail.
  std::vector<std::pair<uint32_t, uint32_t>> wanted;  // (row, record)
  std::vector<uint32_t> receiving;
  for (uint32_t i : which)
    if (source_row[i] >= 0) {
      wanted.emplace_back(static_cast<uint32_t>(source_row[i]), i);
      receiving.push_back(i);
    }
  thumbs.make_room(receiving);
  std::sort(wanted.begin(), wanted.end());
  std::vector<uint8_t> found(wanted.size(), 0);
  Thumbnail thumb;
  auto fill = [&](size_t w, std::span<const uint8_t> stored) {
    bool bad = false;
    const auto data = checked(stored, row_seed(paths_[wanted[w].first]), bad);
    // A whole thumbnail, or its gray plane alone when its chroma is neutral (a
    // gray image's: store_rows keeps a third of the bytes).
    if (bad || (data.size() != thumb.size() && data.size() != kGrayBytes)) {
      ++damaged_rows_;
      return;
    }
    std::copy(data.begin(), data.end(), thumb.begin());
    if (data.size() == kGrayBytes) std::fill(thumb.begin() + kGrayBytes, thumb.end(), uint8_t{128});
    thumbs.put(wanted[w].second, thumb);
    found[w] = 1;
  };
  if (wanted.size() * 8 >= paths_.size()) {  // many: one pass over the table in path order
    Stmt q(db_->h, "SELECT path, data FROM thumbs WHERE root = ? ORDER BY path");
    sqlite3_bind_text(q.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
    size_t w = 0;
    while (w < wanted.size() && q.step()) {
      auto p = blob(q.s, 0);
      const std::string_view path(reinterpret_cast<const char*>(p.data()), p.size());
      while (w < wanted.size() && std::string_view(paths_[wanted[w].first]) < path) ++w;
      for (; w < wanted.size() && std::string_view(paths_[wanted[w].first]) == path; ++w) fill(w, blob(q.s, 1));
    }
  } else {  // a few: one lookup each
    Stmt q(db_->h, "SELECT data FROM thumbs WHERE root = ? AND path = ?");
    for (size_t w = 0; w < wanted.size(); ++w) {
      sqlite3_reset(q.s);
      sqlite3_bind_text(q.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
      const std::string& path = paths_[wanted[w].first];
      sqlite3_bind_blob(q.s, 2, path.data(), static_cast<int>(path.size()), SQLITE_STATIC);
      if (q.step()) fill(w, blob(q.s, 0));
    }
  }
  std::vector<uint32_t> missing;
  for (size_t w = 0; w < wanted.size(); ++w)
    if (!found[w]) missing.push_back(wanted[w].second);
  std::sort(missing.begin(), missing.end());
  missing.erase(std::unique(missing.begin(), missing.end()), missing.end());
  return missing;
}

int64_t RecordCache::row_with_content(const std::array<uint64_t, 2>& hash, uint64_t size) const {
  const ContentKey key{hash[0], hash[1], size, 0};
  auto it = std::lower_bound(by_content_.begin(), by_content_.end(), key);
  if (it == by_content_.end() || it->h0 != key.h0 || it->h1 != key.h1 || it->size != key.size) return -1;
  return it->row;
}

std::vector<size_t> RecordCache::rows_with_content(const std::array<uint64_t, 2>& hash, uint64_t size) const {
  std::vector<size_t> rows;
  const ContentKey key{hash[0], hash[1], size, 0};
  for (auto it = std::lower_bound(by_content_.begin(), by_content_.end(), key);
       it != by_content_.end() && it->h0 == key.h0 && it->h1 == key.h1 && it->size == key.size; ++it)
    rows.push_back(it->row);
  return rows;
}

RecordCache::~RecordCache() = default;

std::optional<GroupResult> RecordCache::load_groups(uint64_t fingerprint, size_t n) const {
  if (set_aside_) return std::nullopt;
  try {
    Stmt q(db_->h, "SELECT fingerprint, data FROM groups WHERE root = ?");
    sqlite3_bind_text(q.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
    if (!q.step()) return std::nullopt;
    const auto* fp = sqlite3_column_text(q.s, 0);
    if (!fp || std::string(reinterpret_cast<const char*>(fp)) != std::to_string(fingerprint)) return std::nullopt;
    bool bad = false;
    auto data = checked(blob(q.s, 1), row_seed(root_, fingerprint), bad);
    if (bad) {  // damaged: the groups are computed again and stored anew
      ++damaged_rows_;
      return std::nullopt;
    }
    json j = parse_cbor(data.data(), data.data() + data.size());
    GroupResult g;
    g.group_of.assign(n, -1);
    for (const auto& e : j.at("groups")) {
      Group grp;
      grp.members = e.at(0).get<std::vector<uint32_t>>();
      grp.exact = e.at(1).get<bool>();
      grp.diameter = e.at(2).get<int>();
      grp.diameter_exact = e.at(3).get<bool>();
      for (const auto& l : e.at(4)) {
        GroupLink k{l.at(0).get<uint32_t>(), l.at(1).get<uint32_t>(), l.at(2).get<int>(), l.at(3).get<float>(),
                    l.at(4).get<int>(), l.at(5).get<bool>(), l.at(6).get<int>(), l.size() > 7 && l.at(7).get<bool>(),
                    l.size() > 8 ? l.at(8).get<int>() : 0};
        if (!link_in_range(k, n)) return std::nullopt;
        grp.links.push_back(k);
      }
      for (uint32_t m : grp.members) {
        if (m >= n || g.group_of[m] >= 0) return std::nullopt;
        g.group_of[m] = static_cast<int64_t>(g.groups.size());
      }
      g.groups.push_back(std::move(grp));
    }
    g.exact_pairs = j.at("exact_pairs").get<uint64_t>();
    g.candidate_hits = j.at("candidate_hits").get<uint64_t>();
    g.confirmed_pairs = j.at("confirmed_pairs").get<uint64_t>();
    return g;
  } catch (const Damaged&) {
    set_aside();  // the groups' pages are damaged: a new file next run
    return std::nullopt;
  } catch (const std::exception&) {
    return std::nullopt;  // anything odd is a miss: the join runs again
  }
}

void RecordCache::store_groups(uint64_t fingerprint, const GroupResult& g) {
  json groups = json::array();
  for (const auto& grp : g.groups) {
    json links = json::array();
    for (const auto& l : grp.links) links.push_back(json::array({l.a, l.b, l.turn, l.correlation, l.blur_step, l.blurred_a, l.fit_source, l.resampled, l.jpeg_quality}));
    groups.push_back(json::array({grp.members, grp.exact, grp.diameter, grp.diameter_exact, links}));
  }
  json j = {{"groups", groups}, {"exact_pairs", g.exact_pairs}, {"candidate_hits", g.candidate_hits},
            {"confirmed_pairs", g.confirmed_pairs}};
  std::vector<uint8_t> data = json::to_cbor(j);
  append_sum(data, row_seed(root_, fingerprint));
  std::string fp = std::to_string(fingerprint);
  if (set_aside_) return;
  try {
    Stmt ins(db_->h, "INSERT OR REPLACE INTO groups(root, fingerprint, data) VALUES(?, ?, ?)");
    sqlite3_bind_text(ins.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
    sqlite3_bind_text(ins.s, 2, fp.c_str(), -1, SQLITE_TRANSIENT);
    sqlite3_bind_blob(ins.s, 3, data.data(), static_cast<int>(data.size()), SQLITE_TRANSIENT);
    ins.run();
  } catch (const Damaged& e) {
    set_aside();
    throw std::runtime_error(std::string(e.what()) + "; the file was moved aside, the next run starts a new one");
  }
}

void RecordCache::set_aside() const {
  if (set_aside_) return;
  set_aside_ = true;
  db_->close();
  std::error_code ec;
  std::filesystem::rename(file_, file_.string() + ".damaged-" + std::to_string(getpid()), ec);
  for (const char* suffix : {"-wal", "-shm"}) std::filesystem::remove(file_.string() + suffix, ec);
}

void RecordCache::store(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs) {
  if (set_aside_) return;
  try {
    store_rows(records, thumbs);
  } catch (const Damaged& e) {
    set_aside();
    throw std::runtime_error(std::string(e.what()) + "; the file was moved aside, the next run starts a new one");
  }
}

void RecordCache::store_rows(const std::vector<FileRecord>& records, const ThumbnailTable& thumbs) {
  // Records in path order (the read stage gives them so; anything else is sorted here).
  std::vector<uint32_t> order(records.size());
  std::iota(order.begin(), order.end(), 0u);
  auto by_path = [&](uint32_t a, uint32_t b) { return records[a].path < records[b].path; };
  if (!std::is_sorted(order.begin(), order.end(), by_path)) std::sort(order.begin(), order.end(), by_path);
  // Merge with the stored rows: unchanged rows are not written again, rows of
  // files that are gone are deleted.
  std::vector<uint32_t> write, gone;
  size_t j = 0;
  for (uint32_t i : order) {
    const FileRecord& r = records[i];
    while (j < paths_.size() && paths_[j] < r.path) gone.push_back(static_cast<uint32_t>(j++));
    if (j < paths_.size() && paths_[j] == r.path) {
      const bool same = stamps_[j] == Stamp{r.size, r.mtime_ns, r.inode};
      ++j;
      if (same) continue;
    }
    write.push_back(i);
  }
  while (j < paths_.size()) gone.push_back(static_cast<uint32_t>(j++));
  db_->exec("BEGIN IMMEDIATE");
  try {
    {
      for (const char* sql : {"DELETE FROM records WHERE root = ? AND path = ?", "DELETE FROM thumbs WHERE root = ? AND path = ?"}) {
        Stmt del(db_->h, sql);
        for (uint32_t k : gone) {
          sqlite3_reset(del.s);
          sqlite3_bind_text(del.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
          sqlite3_bind_blob(del.s, 2, paths_[k].data(), static_cast<int>(paths_[k].size()), SQLITE_TRANSIENT);
          del.run();
        }
      }
    }
    {  // forget roots that no longer exist, so the file does not grow without end
      std::vector<std::string> roots;
      Stmt q(db_->h, "SELECT DISTINCT root FROM records");
      while (q.step()) roots.emplace_back(reinterpret_cast<const char*>(sqlite3_column_text(q.s, 0)));
      for (const auto& root : roots) {
        std::error_code ec;
        if (std::filesystem::exists(root, ec) || ec) continue;
        for (const char* sql : {"DELETE FROM records WHERE root = ?", "DELETE FROM thumbs WHERE root = ?"}) {
          Stmt drop(db_->h, sql);
          sqlite3_bind_text(drop.s, 1, root.c_str(), -1, SQLITE_TRANSIENT);
          drop.run();
        }
      }
    }
    Stmt ins(db_->h, "INSERT OR REPLACE INTO records(root, path, size, mtime, inode, data) VALUES(?, ?, ?, ?, ?, ?)");
    Stmt ins_thumb(db_->h, "INSERT OR REPLACE INTO thumbs(root, path, data) VALUES(?, ?, ?)");
    Stmt del_thumb(db_->h, "DELETE FROM thumbs WHERE root = ? AND path = ?");
    std::vector<uint8_t> data, thumb_data;
    Thumbnail thumb;
    for (uint32_t i : write) {
      const FileRecord& r = records[i];
      data.clear();
      detail::record_to_bytes(r, data);
      append_sum(data, row_seed(r.path, r.size, static_cast<uint64_t>(r.mtime_ns), r.inode));
      sqlite3_reset(ins.s);
      sqlite3_bind_text(ins.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
      sqlite3_bind_blob(ins.s, 2, r.path.data(), static_cast<int>(r.path.size()), SQLITE_TRANSIENT);
      sqlite3_bind_int64(ins.s, 3, static_cast<sqlite3_int64>(r.size));
      sqlite3_bind_int64(ins.s, 4, r.mtime_ns);
      sqlite3_bind_int64(ins.s, 5, static_cast<sqlite3_int64>(r.inode));
      sqlite3_bind_blob(ins.s, 6, data.data(), static_cast<int>(data.size()), SQLITE_STATIC);
      ins.run();
      // A record without its thumbnail at hand (not expected) stores none: the
      // next run that needs it reads the file again.
      const bool with_thumb = r.features.has_lookalike && thumbs.has(i);
      Stmt& t = with_thumb ? ins_thumb : del_thumb;
      sqlite3_reset(t.s);
      sqlite3_bind_text(t.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
      sqlite3_bind_blob(t.s, 2, r.path.data(), static_cast<int>(r.path.size()), SQLITE_TRANSIENT);
      if (with_thumb) {
        thumbs.get(i, thumb);
        thumb_data.assign(thumb.begin(), neutral_chroma(thumb) ? thumb.begin() + kGrayBytes : thumb.end());
        append_sum(thumb_data, row_seed(r.path));
        sqlite3_bind_blob(t.s, 3, thumb_data.data(), static_cast<int>(thumb_data.size()), SQLITE_STATIC);
      }
      t.run();
    }
    db_->exec("COMMIT");
  } catch (...) {
    sqlite3_exec(db_->h, "ROLLBACK", nullptr, nullptr, nullptr);
    throw;
  }
}

}  // namespace tamis
