#include "tamis/cache.h"

#include <sqlite3.h>
#include <unistd.h>

#include <cstdlib>
#include <stdexcept>

#include <nlohmann/json.hpp>

#include "record_codec.h"

namespace tamis {

using nlohmann::json;

struct RecordCache::Db {
  sqlite3* h = nullptr;
  ~Db() {
    if (h) sqlite3_close(h);
  }
  void exec(const char* sql) {
    char* err = nullptr;
    if (sqlite3_exec(h, sql, nullptr, nullptr, &err) != SQLITE_OK) {
      std::string msg = err ? err : "unknown error";
      sqlite3_free(err);
      throw std::runtime_error("cache: " + msg);
    }
  }
};

namespace {

struct Stmt {
  sqlite3_stmt* s = nullptr;
  Stmt(sqlite3* db, const char* sql) {
    if (sqlite3_prepare_v2(db, sql, -1, &s, nullptr) != SQLITE_OK)
      throw std::runtime_error(std::string("cache: ") + sqlite3_errmsg(db));
  }
  ~Stmt() { sqlite3_finalize(s); }
};

std::string hash_key(const std::array<uint64_t, 2>& h, uint64_t size) {
  return std::to_string(h[0]) + ":" + std::to_string(h[1]) + ":" + std::to_string(size);
}

std::string meta_value(sqlite3* db, const char* key) {
  Stmt q(db, "SELECT value FROM meta WHERE key = ?");
  sqlite3_bind_text(q.s, 1, key, -1, SQLITE_STATIC);
  if (sqlite3_step(q.s) == SQLITE_ROW) return reinterpret_cast<const char*>(sqlite3_column_text(q.s, 0));
  return "";
}

void set_meta(sqlite3* db, const char* key, const std::string& value) {
  Stmt q(db, "INSERT OR REPLACE INTO meta(key, value) VALUES(?, ?)");
  sqlite3_bind_text(q.s, 1, key, -1, SQLITE_STATIC);
  sqlite3_bind_text(q.s, 2, value.c_str(), -1, SQLITE_TRANSIENT);
  if (sqlite3_step(q.s) != SQLITE_DONE) throw std::runtime_error(std::string("cache: ") + sqlite3_errmsg(db));
}

// Opens and checks the database; false when it is damaged.
bool open_checked(const std::filesystem::path& file, sqlite3** out) {
  if (sqlite3_open_v2(file.c_str(), out, SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE | SQLITE_OPEN_FULLMUTEX, nullptr) !=
      SQLITE_OK)
    return false;
  sqlite3_busy_timeout(*out, 30000);
  sqlite3_stmt* q = nullptr;
  bool ok = sqlite3_prepare_v2(*out, "PRAGMA quick_check", -1, &q, nullptr) == SQLITE_OK &&
            sqlite3_step(q) == SQLITE_ROW &&
            std::string(reinterpret_cast<const char*>(sqlite3_column_text(q, 0))) == "ok";
  sqlite3_finalize(q);
  return ok;
}

}  // namespace

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
  if (!open_checked(file, &db_->h)) {
    if (db_->h) sqlite3_close(db_->h);
    db_->h = nullptr;
    std::filesystem::rename(file, file.string() + ".damaged-" + std::to_string(getpid()), ec);
    for (const char* suffix : {"-wal", "-shm"}) std::filesystem::remove(file.string() + suffix, ec);
    rebuilt_ = true;
    if (!open_checked(file, &db_->h)) throw std::runtime_error("cache: cannot create " + file.string());
  }
  db_->exec("PRAGMA journal_mode=WAL");
  db_->exec("PRAGMA synchronous=NORMAL");
  db_->exec("CREATE TABLE IF NOT EXISTS meta(key TEXT PRIMARY KEY, value TEXT NOT NULL)");
  db_->exec("CREATE TABLE IF NOT EXISTS groups(root TEXT PRIMARY KEY, fingerprint TEXT NOT NULL, data BLOB NOT NULL)");
  db_->exec("CREATE TABLE IF NOT EXISTS records(root TEXT NOT NULL, path BLOB NOT NULL, size INTEGER NOT NULL,"
            " mtime INTEGER NOT NULL, inode INTEGER NOT NULL, data BLOB NOT NULL, PRIMARY KEY(root, path))");
  const std::string want = std::to_string(kCacheSchemaVersion) + "|" + settings_key;
  if (meta_value(db_->h, "version") != want) {
    db_->exec("BEGIN IMMEDIATE");
    db_->exec("DELETE FROM records");
    db_->exec("DELETE FROM groups");
    set_meta(db_->h, "version", want);
    db_->exec("COMMIT");
  }
  Stmt q(db_->h, "SELECT path, size, mtime, inode, data FROM records WHERE root = ?");
  sqlite3_bind_text(q.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
  while (sqlite3_step(q.s) == SQLITE_ROW) {
    try {
      const auto* blob = static_cast<const uint8_t*>(sqlite3_column_blob(q.s, 4));
      std::vector<uint8_t> bytes(blob, blob + sqlite3_column_bytes(q.s, 4));
      FileRecord r = detail::record_from_json(json::from_cbor(bytes));
      const auto* p = static_cast<const char*>(sqlite3_column_blob(q.s, 0));
      std::string path(p, p + sqlite3_column_bytes(q.s, 0));
      if (r.path != path) continue;  // an inconsistent row is ignored, never trusted
      by_path_.emplace(path, std::move(r));
    } catch (const std::exception&) {
      continue;  // a row that does not decode is a miss
    }
  }
  for (const auto& [path, r] : by_path_)
    if (r.features.has_content_hash) by_hash_.emplace(hash_key(r.features.content_hash, r.size), &r);
}

RecordCache::~RecordCache() = default;

std::optional<GroupResult> RecordCache::load_groups(uint64_t fingerprint, size_t n) const {
  try {
    Stmt q(db_->h, "SELECT fingerprint, data FROM groups WHERE root = ?");
    sqlite3_bind_text(q.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
    if (sqlite3_step(q.s) != SQLITE_ROW) return std::nullopt;
    if (std::string(reinterpret_cast<const char*>(sqlite3_column_text(q.s, 0))) != std::to_string(fingerprint))
      return std::nullopt;
    const auto* blob = static_cast<const uint8_t*>(sqlite3_column_blob(q.s, 1));
    json j = json::from_cbor(std::vector<uint8_t>(blob, blob + sqlite3_column_bytes(q.s, 1)));
    GroupResult g;
    g.group_of.assign(n, -1);
    for (const auto& e : j.at("groups")) {
      Group grp;
      grp.members = e.at(0).get<std::vector<uint32_t>>();
      grp.exact = e.at(1).get<bool>();
      grp.diameter = e.at(2).get<int>();
      grp.diameter_exact = e.at(3).get<bool>();
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
  } catch (const std::exception&) {
    return std::nullopt;  // anything odd is a miss: the join runs again
  }
}

void RecordCache::store_groups(uint64_t fingerprint, const GroupResult& g) {
  json groups = json::array();
  for (const auto& grp : g.groups) groups.push_back(json::array({grp.members, grp.exact, grp.diameter, grp.diameter_exact}));
  json j = {{"groups", groups}, {"exact_pairs", g.exact_pairs}, {"candidate_hits", g.candidate_hits},
            {"confirmed_pairs", g.confirmed_pairs}};
  std::vector<uint8_t> data = json::to_cbor(j);
  std::string fp = std::to_string(fingerprint);
  Stmt ins(db_->h, "INSERT OR REPLACE INTO groups(root, fingerprint, data) VALUES(?, ?, ?)");
  sqlite3_bind_text(ins.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
  sqlite3_bind_text(ins.s, 2, fp.c_str(), -1, SQLITE_TRANSIENT);
  sqlite3_bind_blob(ins.s, 3, data.data(), static_cast<int>(data.size()), SQLITE_TRANSIENT);
  if (sqlite3_step(ins.s) != SQLITE_DONE) throw std::runtime_error(std::string("cache: ") + sqlite3_errmsg(db_->h));
}

const FileRecord* RecordCache::by_content(const std::array<uint64_t, 2>& hash, uint64_t size) const {
  auto it = by_hash_.find(hash_key(hash, size));
  return it == by_hash_.end() ? nullptr : it->second;
}

void RecordCache::store(const std::vector<FileRecord>& records) {
  db_->exec("BEGIN IMMEDIATE");
  try {
    {  // rows of this root whose files are gone
      std::unordered_map<std::string, bool> present;
      present.reserve(records.size());
      for (const auto& r : records) present.emplace(r.path, true);
      Stmt del(db_->h, "DELETE FROM records WHERE root = ? AND path = ?");
      for (const auto& [path, r] : by_path_) {
        if (present.count(path)) continue;
        sqlite3_reset(del.s);
        sqlite3_bind_text(del.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
        sqlite3_bind_blob(del.s, 2, path.data(), static_cast<int>(path.size()), SQLITE_TRANSIENT);
        if (sqlite3_step(del.s) != SQLITE_DONE) throw std::runtime_error(sqlite3_errmsg(db_->h));
      }
    }
    {  // forget roots that no longer exist, so the file does not grow without end
      std::vector<std::string> roots;
      Stmt q(db_->h, "SELECT DISTINCT root FROM records");
      while (sqlite3_step(q.s) == SQLITE_ROW) roots.emplace_back(reinterpret_cast<const char*>(sqlite3_column_text(q.s, 0)));
      for (const auto& root : roots) {
        std::error_code ec;
        if (std::filesystem::exists(root, ec) || ec) continue;
        Stmt gone(db_->h, "DELETE FROM records WHERE root = ?");
        sqlite3_bind_text(gone.s, 1, root.c_str(), -1, SQLITE_TRANSIENT);
        if (sqlite3_step(gone.s) != SQLITE_DONE) throw std::runtime_error(sqlite3_errmsg(db_->h));
      }
    }
    Stmt ins(db_->h, "INSERT OR REPLACE INTO records(root, path, size, mtime, inode, data) VALUES(?, ?, ?, ?, ?, ?)");
    for (const auto& r : records) {
      auto known = by_path_.find(r.path);  // rows that are already right are not written again
      if (known != by_path_.end() && known->second.size == r.size && known->second.mtime_ns == r.mtime_ns &&
          known->second.inode == r.inode)
        continue;
      std::vector<uint8_t> data = json::to_cbor(detail::record_to_json(r, true));
      sqlite3_reset(ins.s);
      sqlite3_bind_text(ins.s, 1, root_.c_str(), -1, SQLITE_TRANSIENT);
      sqlite3_bind_blob(ins.s, 2, r.path.data(), static_cast<int>(r.path.size()), SQLITE_TRANSIENT);
      sqlite3_bind_int64(ins.s, 3, static_cast<sqlite3_int64>(r.size));
      sqlite3_bind_int64(ins.s, 4, r.mtime_ns);
      sqlite3_bind_int64(ins.s, 5, static_cast<sqlite3_int64>(r.inode));
      sqlite3_bind_blob(ins.s, 6, data.data(), static_cast<int>(data.size()), SQLITE_TRANSIENT);
      if (sqlite3_step(ins.s) != SQLITE_DONE) throw std::runtime_error(sqlite3_errmsg(db_->h));
    }
    db_->exec("COMMIT");
  } catch (...) {
    sqlite3_exec(db_->h, "ROLLBACK", nullptr, nullptr, nullptr);
    throw;
  }
}

}  // namespace tamis
