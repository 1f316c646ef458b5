// The record cache: hits, misses, renames, damage, sharing. (A killed run is
// tested end to end in cli_test.py.)
#include <catch2/catch.hpp>

#include <sys/stat.h>

#include <filesystem>
#include <sstream>
#include <thread>

#include "support/temp_tree.h"
#include "tamis/audit.h"
#include "tamis/demo.h"
#include "tamis/manifest.h"
#include "tamis/report_json.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {
std::string outputs(const AuditResult& r) {
  std::ostringstream os;
  write_manifest(os, r);
  return os.str() + dump_json(build_report(r));
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
  CHECK(cold.counts.read == n);
  CHECK(warm.counts.read == 1);  // the hidden file is never cached: it is not read either
  CHECK(warm.counts.cached == n - 1);
  CHECK(cold.out == clean.out);
  CHECK(warm.out == clean.out);
}

TEST_CASE("cache: a touched file is read again; a renamed file reuses its record by content", "[cache]") {
  test::TempDir t, c;
  write_demo(t / "data");
  const fs::path cache = c / "records.sqlite";
  audit(t / "data", cache);
  // touch: new modification time
  fs::path f = t / "data" / "gingham" / "swatch_002.jpg";
  fs::last_write_time(f, fs::last_write_time(f) + std::chrono::seconds(5));
  Run touched = audit(t / "data", cache);
  CHECK(touched.counts.cached_by_hash == 1);  // not trusted by path any more; its bytes are hashed
  CHECK(touched.counts.read == 1);            // (and the hidden file, which is never cached)
  // new bytes: read and decoded again
  fs::copy_file(t / "data" / "gingham" / "swatch_003.jpg", f, fs::copy_options::overwrite_existing);
  test::write_text(t / "data" / "gingham" / "swatch_003.jpg", "");  // and an emptied file
  Run changed = audit(t / "data", cache);
  CHECK(changed.counts.read == 2);             // the emptied file and the hidden one
  CHECK(changed.counts.cached_by_hash == 1);   // swatch_002 now holds swatch_003's old bytes
  // rename: same bytes under a new name
  fs::rename(t / "data" / "pinstripe" / "swatch_003.png", t / "data" / "pinstripe" / "renamed.png");
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
  CHECK(ra.note.empty());
  CHECK(rb.note.empty());
  CHECK(ra.out == audit(t / "a", "").out);
  Run wa = audit(t / "a", cache), wb = audit(t / "b", cache);
  CHECK(wa.counts.cached > 0);
  CHECK(wb.counts.cached > 0);
}
