// The record cache: hits, misses, renames, damage, sharing. (A killed run is
// tested end to end in cli_test.py.)
#include <catch2/catch.hpp>

#include <sqlite3.h>
#include <sys/stat.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <thread>

#include "tamis/model/record_codec.h"
#include "support/temp_tree.h"
#include "tamis/demo/demo.h"
#include "tamis/pipeline/audit.h"
#include "tamis/report/outputs.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {
// All four output files, as written (the index and report.html carry the
// thumbnails of group members, which a warm run loads from the cache).
std::string outputs(const AuditResult& r) {
  test::TempDir o;
  write_outputs(o.path(), r);
  std::string all;
  for (const char* name : {"manifest.csv", "report.json", "report.html", "index.cbor"}) {
    auto bytes = test::read_bytes(o / name);
    all += std::string(name) + "\n" + std::string(bytes.begin(), bytes.end());
  }
  return all;
}
struct Run {
  std::string out;
  ReadCounts counts;
  std::string note;
};
Run audit(const fs::path& root, const fs::path& cache) {
  AuditSettings s;
  s.root = root;
  s.cache_file = cache;
  AuditResult r = run_audit(s);
  return {outputs(r), r.counts, r.cache_note};
}
}  // namespace

TEST_CASE("cache: a second audit of an unchanged tree reads no image and writes the same outputs", "[cache]") {
  test::TempDir t, c;
  size_t n = write_demo(t / "data");
  Run clean = audit(t / "data", "");
  Run cold = audit(t / "data", c / "records.sqlite");
  Run warm = audit(t / "data", c / "records.sqlite");
  CHECK(cold.counts.read == n - 1);  // the hidden file is never opened, never counted as read
  CHECK(warm.counts.read == 0);      // (nor cached)
  CHECK(warm.counts.cached == n - 1);
  CHECK(cold.out == clean.out);
  CHECK(warm.out == clean.out);
}

TEST_CASE("cache: a touched file is read again, a renamed file reuses its record by content", "[cache]") {
  test::TempDir t, c;
  write_demo(t / "data");
  const fs::path cache = c / "records.sqlite";
  audit(t / "data", cache);
  // touch: new modification time
  fs::path f = t / "data" / "gingham" / "swatch_002.jpg";
  fs::last_write_time(f, fs::last_write_time(f) + std::chrono::seconds(5));
  Run touched = audit(t / "data", cache);
  CHECK(touched.counts.cached_by_hash == 1);  // not trusted by path any more; its bytes are hashed
  CHECK(touched.counts.read == 0);            // (the hidden file is never opened)
  // new bytes: read and decoded again
  fs::copy_file(t / "data" / "gingham" / "swatch_003.jpg", f, fs::copy_options::overwrite_existing);
  test::write_text(t / "data" / "gingham" / "swatch_003.jpg", "");  // and an emptied file
  Run changed = audit(t / "data", cache);
  CHECK(changed.counts.read == 1);             // the emptied file
  CHECK(changed.counts.cached_by_hash == 1);   // swatch_002 now holds swatch_003's old bytes
  // rename: same bytes under a new name
  fs::rename(t / "data" / "pinstripe" / "swatch_003.jpg", t / "data" / "pinstripe" / "renamed.jpg");
  Run renamed = audit(t / "data", cache);
  CHECK(renamed.counts.cached_by_hash == 1);
  CHECK(renamed.out == audit(t / "data", "").out);
}

TEST_CASE("cache: a damaged cache file is detected and rebuilt", "[cache][fault]") {
  test::TempDir t, c;
  write_demo(t / "data");
  const fs::path cache = c / "records.sqlite";
  audit(t / "data", cache);
  test::write_text(cache, std::string(8192, 'x'));  // garbage over the database
  fs::remove(cache.string() + "-wal");
  fs::remove(cache.string() + "-shm");
  Run again = audit(t / "data", cache);
  CHECK_FALSE(again.note.empty());
  CHECK(again.out == audit(t / "data", "").out);
  CHECK(audit(t / "data", cache).counts.cached > 0);  // rebuilt and usable
}

TEST_CASE("cache: damage past the database header is detected while loading and rebuilt", "[cache][fault]") {
  test::TempDir t, c;
  write_demo(t / "data");
  const fs::path cache = c / "records.sqlite";
  audit(t / "data", cache);
  audit(t / "data", cache);  // a checkpoint has moved the rows into the main file
  fs::remove(cache.string() + "-wal");
  fs::remove(cache.string() + "-shm");
  const auto size = fs::file_size(cache);
  REQUIRE(size > 3 * 4096);
  {  // the first page (header and schema) stays; every later page is overwritten
    std::fstream f(cache, std::ios::in | std::ios::out | std::ios::binary);
    f.seekp(4096);
    std::string junk(size - 4096, '\0');
    for (size_t k = 0; k < junk.size(); ++k) junk[k] = static_cast<char>((k * 2654435761u) >> 13);
    f.write(junk.data(), static_cast<std::streamsize>(junk.size()));
  }
  Run again = audit(t / "data", cache);
  CHECK_FALSE(again.note.empty());
  CHECK(again.counts.cached == 0);
  CHECK(again.out == audit(t / "data", "").out);
  CHECK(audit(t / "data", cache).counts.cached > 0);
}

TEST_CASE("cache: thumbnails another run removed are read from the files again", "[cache][fault]") {
  test::TempDir t, c;
  size_t n = write_demo(t / "data");
  const fs::path cache = c / "records.sqlite";
  Run clean = audit(t / "data", "");
  audit(t / "data", cache);
  {  // as if another run had dropped the stored thumbnails (and the look-alike groups)
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(cache.c_str(), &db) == SQLITE_OK);
    REQUIRE(sqlite3_exec(db, "DELETE FROM thumbs; DELETE FROM groups;", nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
  }
  Run again = audit(t / "data", cache);
  CHECK(again.out == clean.out);
  CHECK(again.counts.read > n / 2);  // every image read again for its thumbnail
}

TEST_CASE("cache: a copy of an unchanged file reuses the record its original keeps", "[cache]") {
  test::TempDir t, c;
  size_t n = write_demo(t / "data");
  const fs::path cache = c / "records.sqlite";
  audit(t / "data", cache);
  fs::copy_file(t / "data" / "gingham" / "swatch_002.jpg", t / "data" / "gingham" / "swatch_002_copy.jpg");
  Run copied = audit(t / "data", cache);
  CHECK(copied.counts.cached == n - 1);     // every old file by path (the hidden one is read)
  CHECK(copied.counts.cached_by_hash == 1);  // the copy: hashed, not decoded
  CHECK(copied.out == audit(t / "data", "").out);
}

TEST_CASE("cache: the record bytes round-trip and every malformed row is refused", "[cache][codec]") {
  // Truth made here: records with every field set, coded and decoded again.
  FileRecord a;
  a.kind = FileKind::image;
  a.defect = Defect::none;
  a.probe = {Format::tiff, ColorMode::cmyk, 16, true, true, true, 8, 4000, 3000, 3, 75};
  a.features.content_hash = {0x0123456789abcdefULL, 0xfedcba9876543210ULL};
  a.features.has_content_hash = true;
  a.features.has_lookalike = true;
  for (int t = 0; t < kDihedralCount; ++t) a.features.look.phash[t] = 0x9e3779b97f4a7c15ULL * (t + 1);
  a.features.stats = {101.25f, 33.5f, 7.125f, 1234.5f, 17, true, 65};
  FileRecord b;  // an unreadable file: no look-alike part
  b.kind = FileKind::unreadable;
  b.defect = Defect::no_decoder;
  b.probe.format = Format::pnm;
  for (const FileRecord* r : {&a, &b}) {
    std::vector<uint8_t> bytes;
    detail::record_to_bytes(*r, bytes);
    CHECK(bytes.size() == (r->features.has_lookalike ? detail::kRecordBytesLookalike : detail::kRecordBytesHead));
    FileRecord back;
    REQUIRE(detail::record_from_bytes(bytes, back));
    CHECK(detail::record_to_json(back, true) == detail::record_to_json(*r, true));
    // Too short, too long: refused.
    for (size_t len = 0; len < bytes.size(); ++len)
      CHECK_FALSE(detail::record_from_bytes(std::span<const uint8_t>(bytes.data(), len), back));
    auto longer = bytes;
    longer.push_back(0);
    CHECK_FALSE(detail::record_from_bytes(longer, back));
    // Each enum one past its last value, and an unknown flag bit: refused.
    const std::pair<size_t, uint8_t> bad[] = {{0, uint8_t(FileKind::ignored) + 1}, {1, uint8_t(kLastDefect) + 1},
                                              {2, uint8_t(Format::pnm) + 1},      {3, uint8_t(ColorMode::cmyk) + 1},
                                              {5, uint8_t(bytes[5] | 64)},        {6, 9},
                                              {7, 101}};  // an orientation past 8, a JPEG quality past 100
    for (auto [at, value] : bad) {
      auto broken = bytes;
      broken[at] = value;
      CHECK_FALSE(detail::record_from_bytes(broken, back));
    }
  }
}

TEST_CASE("cache: two audits share one cache file at once", "[cache][concurrency]") {
  test::TempDir t, c;
  write_demo(t / "a");
  write_demo(t / "b");
  const fs::path cache = c / "records.sqlite";
  Run ra, rb;
  std::thread x([&] { ra = audit(t / "a", cache); });
  std::thread y([&] { rb = audit(t / "b", cache); });
  x.join();
  y.join();
  // Compared as strings, so that a failure prints the note (it failed once under a
  // loaded ctest -j2 and passed on every rerun; the note will say why next time).
  CHECK(ra.note == std::string());
  CHECK(rb.note == std::string());
  CHECK(ra.out == audit(t / "a", "").out);
  Run wa = audit(t / "a", cache), wb = audit(t / "b", cache);
  CHECK(wa.counts.cached > 0);
  CHECK(wb.counts.cached > 0);
}

TEST_CASE("the thumbnail table gives slots on demand, each record its own", "[cache][thumbs]") {
  // Truth constructed here: each slot is written with its record's number.
  ThumbnailTable t;
  t.assign_none(10);
  for (size_t i = 0; i < 10; ++i) CHECK_FALSE(t.has(i));
  t.make_room({7, 2, 7, 9});
  t.make_room({2, 4});
  for (size_t i = 0; i < 10; ++i) CHECK(t.has(i) == (i == 2 || i == 4 || i == 7 || i == 9));
  CHECK_FALSE(t.has(10));
  for (uint32_t i : {2u, 4u, 7u, 9u}) {
    CHECK(t.at(i) == Thumbnail{});  // a new slot holds zeros
    t.at(i).fill(static_cast<uint8_t>(i));
  }
  for (uint32_t i : {2u, 4u, 7u, 9u}) CHECK(t.at(i)[1023] == i);
  t.assign_all(3);
  for (size_t i = 0; i < 3; ++i) CHECK(t.has(i));
  CHECK_FALSE(t.has(3));
  t.at(1).fill(5);
  CHECK(t.at(0)[0] == 0);
  CHECK(t.at(1)[0] == 5);
  CHECK(sizeof(FileRecord) < 256);  // the thumbnail is not in the record
}

TEST_CASE("a spilled thumbnail table reads back what was written, zeros elsewhere, and leaves no file", "[cache][thumbs]") {
  // Truth constructed here: slot i holds bytes (i * 7 + k) mod 251.
  test::TempDir scratch;
  auto pattern = [](size_t i) {
    Thumbnail t;
    for (size_t k = 0; k < t.size(); ++k) t[k] = static_cast<uint8_t>((i * 7 + k) % 251);
    return t;
  };
  ThumbnailTable s, m;
  s.assign_spilled(40, scratch.path());
  m.assign_all(40);
  CHECK(s.spilled());
  CHECK_FALSE(m.spilled());
  CHECK(fs::is_empty(scratch.path()));  // an unnamed file
  for (size_t i = 0; i < 40; ++i) CHECK(s.has(i));
  CHECK_FALSE(s.has(40));
  std::vector<Thumbnail> run;
  for (size_t i = 10; i < 20; ++i) run.push_back(pattern(i));
  s.put_range(10, run.size(), run.data());
  m.put_range(10, run.size(), run.data());
  for (size_t i : {3u, 25u, 39u}) {
    s.put(i, pattern(i));
    m.put(i, pattern(i));
  }
  Thumbnail got;
  for (size_t i = 0; i < 40; ++i) {
    s.get(i, got);
    const bool written = (i >= 10 && i < 20) || i == 3 || i == 25 || i == 39;
    CHECK(got == (written ? pattern(i) : Thumbnail{}));
    CHECK(m.at(i) == got);
  }
  const std::vector<uint32_t> which = {3, 10, 11, 12, 19, 25, 30};  // runs and single records
  std::vector<Thumbnail> a(which.size()), b(which.size());
  s.get_many(which.data(), which.size(), a.data());
  m.get_many(which.data(), which.size(), b.data());
  CHECK(a == b);
  // Gray thumbnails (chroma all 128) mixed with colour ones in a run, and
  // rewrites that change a record's kind: the spilled table keeps the gray
  // planes apart from a pool of chroma planes, and must read back every kind.
  auto gray = [&](size_t i) {
    Thumbnail t = pattern(i);
    std::fill(t.begin() + kGrayBytes, t.end(), uint8_t{128});
    return t;
  };
  std::vector<Thumbnail> mixed;
  for (size_t i = 30; i < 36; ++i) mixed.push_back(i % 2 ? gray(i) : pattern(i));
  s.put_range(30, mixed.size(), mixed.data());
  m.put_range(30, mixed.size(), mixed.data());
  for (auto [i, t] : {std::pair<size_t, Thumbnail>{12, pattern(100)}, {31, pattern(101)}, {30, gray(30)}, {39, Thumbnail{}}}) {
    s.put(i, t);
    m.put(i, t);
  }
  for (size_t i = 0; i < 40; ++i) {
    s.get(i, got);
    CHECK(m.at(i) == got);
  }
  CHECK(m.at(12) == pattern(100));
  CHECK(m.at(31) == pattern(101));
  CHECK(m.at(33) == gray(33));
  const std::vector<uint32_t> all = [] {
    std::vector<uint32_t> v(40);
    for (uint32_t i = 0; i < 40; ++i) v[i] = i;
    return v;
  }();
  std::vector<Thumbnail> sa(40), ma(40);
  s.get_many(all.data(), all.size(), sa.data());
  m.get_many(all.data(), all.size(), ma.data());
  CHECK(sa == ma);
  {
    // Every record rewritten again and again, colour and gray in turn: a record
    // keeps one pool slot, so the file (40 thumbnails' room) never overflows.
    ThumbnailTable r;
    r.assign_spilled(40, scratch.path());
    for (int round = 0; round < 4; ++round)
      for (size_t i = 0; i < 40; ++i) CHECK_NOTHROW(r.put(i, (round + i) % 2 ? gray(i + round) : pattern(i + round)));
    for (size_t i = 0; i < 40; ++i) {
      r.get(i, got);
      CHECK(got == ((3 + i) % 2 ? gray(i + 3) : pattern(i + 3)));
    }
  }
  ThumbnailTable copy = s;  // shares the file
  copy.get(25, got);
  CHECK(got == pattern(25));
  s.keep_only({25, 12, 3, 3, 77});
  CHECK_FALSE(s.spilled());
  for (size_t i = 0; i < 40; ++i) CHECK(s.has(i) == (i == 3 || i == 12 || i == 25));
  CHECK(s.at(12) == pattern(100));
  CHECK(s.at(25) == pattern(25));
  m.keep_only({});
  for (size_t i = 0; i < 40; ++i) CHECK_FALSE(m.has(i));
  // A scratch folder that does not exist: a clear error naming it.
  ThumbnailTable bad;
  CHECK_THROWS_WITH(bad.assign_spilled(4, scratch / "missing"), Catch::Contains("missing"));
}

TEST_CASE("thumbnails in a scratch file give the same outputs, and never go to a scratch folder inside ROOT",
          "[cache][thumbs]") {
  // Truth: the run with every thumbnail in memory (the same build).
  test::TempDir t, c, scratch;
  write_demo(t / "data");
  auto run = [&](uint64_t memory, const fs::path& dir, const fs::path& cache) {
    AuditSettings s;
    s.root = t / "data";
    s.cache_file = cache;
    s.read.thumbnail_memory_bytes = memory;
    s.read.scratch_dir = dir;
    return outputs(run_audit(s));
  };
  const std::string in_memory = run(UINT64_MAX, scratch.path(), "");
  CHECK(run(0, scratch.path(), "") == in_memory);
  CHECK(run(0, scratch.path(), c / "records.sqlite") == in_memory);  // cold, with the cache
  CHECK(run(0, scratch.path(), c / "records.sqlite") == in_memory);  // warm
  CHECK(fs::is_empty(scratch.path()));
  // Whether the read spilled: read_files with a thumbnail table.
  std::vector<WalkEntry> files = walk_tree(t / "data").files;
  auto spills = [&](const fs::path& dir) {
    ReadOptions o;
    o.thumbnail_memory_bytes = 0;
    o.scratch_dir = dir;
    ThumbnailTable thumbs;
    ReadContext ctx;
    ctx.thumbs = &thumbs;
    read_files(t / "data", files, o, ctx);
    return thumbs.spilled();
  };
  CHECK(spills(scratch.path()));
  CHECK_FALSE(spills(t / "data"));             // ROOT itself
  CHECK_FALSE(spills(t / "data" / "gingham"));  // inside ROOT
  CHECK_FALSE(spills(""));
  CHECK_FALSE(spills(scratch / "missing"));
  // A folder where no file can be made (procfs refuses files even to root, as a
  // full or read-only file system would): the thumbnails stay in memory, the
  // outputs are the same and the read says why.
  if (fs::is_directory("/proc/self")) {
    CHECK_FALSE(spills("/proc/self"));
    ReadOptions o;
    o.thumbnail_memory_bytes = 0;
    o.scratch_dir = "/proc/self";
    ThumbnailTable thumbs;
    ReadCounts counts;
    ReadContext ctx;
    ctx.thumbs = &thumbs;
    ctx.counts = &counts;
    read_files(t / "data", files, o, ctx);
    CHECK_THAT(counts.scratch_note, Catch::Contains("/proc/self") && Catch::Contains("stayed in memory"));
    CHECK(run(0, "/proc/self", "") == in_memory);
    CHECK(run(0, "/proc/self", c / "records2.sqlite") == in_memory);
  }
}

TEST_CASE("cache: a few damaged bytes inside any row never change an output", "[cache][fault]") {
  // Small damage that SQLite's own structure does not notice: bytes changed inside
  // the stored records, thumbnails and groups. Each row ends with a checksum; a
  // damaged row is treated as absent, so the outputs equal a run without the cache.
  test::TempDir t, c;
  write_demo(t / "data");
  const std::string clean = audit(t / "data", "").out;
  for (const char* table : {"records", "thumbs", "groups"}) {
    INFO(table);
    const fs::path cache = c / (std::string(table) + ".sqlite");
    audit(t / "data", cache);
    size_t damaged = 0;
    {
      sqlite3* db = nullptr;
      REQUIRE(sqlite3_open(cache.c_str(), &db) == SQLITE_OK);
      std::vector<std::pair<sqlite3_int64, std::vector<uint8_t>>> rows;
      sqlite3_stmt* q = nullptr;
      REQUIRE(sqlite3_prepare_v2(db, (std::string("SELECT rowid, data FROM ") + table).c_str(), -1, &q, nullptr) == SQLITE_OK);
      while (sqlite3_step(q) == SQLITE_ROW) {
        const auto* p = static_cast<const uint8_t*>(sqlite3_column_blob(q, 1));
        rows.push_back({sqlite3_column_int64(q, 0), std::vector<uint8_t>(p, p + sqlite3_column_bytes(q, 1))});
      }
      sqlite3_finalize(q);
      REQUIRE_FALSE(rows.empty());
      sqlite3_stmt* u = nullptr;
      REQUIRE(sqlite3_prepare_v2(db, (std::string("UPDATE ") + table + " SET data = ? WHERE rowid = ?").c_str(), -1, &u, nullptr) == SQLITE_OK);
      for (size_t k = 0; k < rows.size(); k += 3) {  // every third row: 8 bytes changed at a row-dependent place
        auto& d = rows[k].second;
        const size_t at = (k * 7919) % (d.size() > 8 ? d.size() - 8 : 1);
        for (size_t b = 0; b < 8 && at + b < d.size(); ++b) d[at + b] ^= static_cast<uint8_t>(0x5A + b);
        sqlite3_reset(u);
        sqlite3_bind_blob(u, 1, d.data(), static_cast<int>(d.size()), SQLITE_TRANSIENT);
        sqlite3_bind_int64(u, 2, rows[k].first);
        REQUIRE(sqlite3_step(u) == SQLITE_DONE);
        ++damaged;
      }
      sqlite3_finalize(u);
      sqlite3_close(db);
    }
    REQUIRE(damaged > 0);
    Run hurt = audit(t / "data", cache);
    CHECK(hurt.out == clean);
    CHECK(hurt.note.find("damaged") != std::string::npos);
    Run after = audit(t / "data", cache);  // damaged records were stored anew
    CHECK(after.out == clean);
  }
}

TEST_CASE("cache: damaged pages that only the groups read are moved aside, not met on every run", "[cache][fault]") {
  // The records load cleanly; the stored groups' page is garbage. SQLite reports
  // it as malformed only when the groups are read or written, after the load.
  test::TempDir t, c;
  write_demo(t / "data");
  const std::string clean = audit(t / "data", "").out;
  const fs::path cache = c / "records.sqlite";
  audit(t / "data", cache);
  audit(t / "data", cache);  // a checkpoint has moved every page into the main file
  fs::remove(cache.string() + "-wal");
  fs::remove(cache.string() + "-shm");
  int64_t page_size = 0, root_page = 0;
  {
    sqlite3* db = nullptr;
    REQUIRE(sqlite3_open(cache.c_str(), &db) == SQLITE_OK);
    sqlite3_stmt* q = nullptr;
    REQUIRE(sqlite3_prepare_v2(db, "SELECT rootpage FROM sqlite_master WHERE name = 'groups'", -1, &q, nullptr) == SQLITE_OK);
    REQUIRE(sqlite3_step(q) == SQLITE_ROW);
    root_page = sqlite3_column_int64(q, 0);
    sqlite3_finalize(q);
    REQUIRE(sqlite3_prepare_v2(db, "PRAGMA page_size", -1, &q, nullptr) == SQLITE_OK);
    REQUIRE(sqlite3_step(q) == SQLITE_ROW);
    page_size = sqlite3_column_int64(q, 0);
    sqlite3_finalize(q);
    sqlite3_close(db);
  }
  REQUIRE(root_page > 1);
  {
    std::fstream f(cache, std::ios::in | std::ios::out | std::ios::binary);
    f.seekp((root_page - 1) * page_size);
    std::string junk(static_cast<size_t>(page_size), '\0');
    for (size_t k = 0; k < junk.size(); ++k) junk[k] = static_cast<char>((k * 2654435761u) >> 11);
    f.write(junk.data(), static_cast<std::streamsize>(junk.size()));
  }
  Run hurt = audit(t / "data", cache);
  CHECK(hurt.out == clean);
  CHECK(hurt.note.find("moved aside") != std::string::npos);
  size_t aside = 0;
  for (const auto& e : fs::directory_iterator(c.path())) aside += e.path().filename().string().find(".damaged-") != std::string::npos;
  CHECK(aside == 1);
  Run fresh = audit(t / "data", cache);  // a new file: read cold, no damage met
  CHECK(fresh.out == clean);
  CHECK(fresh.note.empty());
  Run warm = audit(t / "data", cache);
  CHECK(warm.out == clean);
  CHECK(warm.counts.cached > 0);
  CHECK(warm.note.empty());
}
