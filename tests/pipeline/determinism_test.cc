// Determinism: the outputs depend on the files and the settings only.
#include <catch2/catch.hpp>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <sstream>

#include <opencv2/imgcodecs.hpp>

#include "support/temp_tree.h"
#include "tamis/base/atomic_file.h"
#include "tamis/demo/demo.h"
#include "tamis/pipeline/audit.h"
#include "tamis/report/manifest.h"
#include "tamis/report/outputs.h"

#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>
#include "tamis/report/report_html.h"
#include "tamis/report/report_json.h"

using namespace tamis;

namespace {
std::string manifest_of(const std::filesystem::path& root, unsigned threads, uint64_t seed = 1,
                        const std::filesystem::path& scratch = {}) {
  AuditSettings s;
  s.root = root;
  s.read.threads = threads;
  if (!scratch.empty()) {  // every thumbnail in a scratch file
    s.read.thumbnail_memory_bytes = 0;
    s.read.scratch_dir = scratch;
  }
  s.split.seed = seed;
  AuditResult r = run_audit(s);
  std::ostringstream os;
  write_manifest(os, r);
  return os.str() + dump_json(build_report(r));
}
}  // namespace

TEST_CASE("same tree, same settings: byte-identical outputs for 1 and 4 threads", "[determinism][threads]") {
  test::TempDir t;
  write_demo(t.path());
  std::string one = manifest_of(t.path(), 1);
  CHECK(one == manifest_of(t.path(), 4));
  CHECK(one == manifest_of(t.path(), 2));
  test::TempDir scratch;
  CHECK(one == manifest_of(t.path(), 4, 1, scratch.path()));
  CHECK(one == manifest_of(t.path(), 1, 1, scratch.path()));
  CHECK(one != manifest_of(t.path(), 2, 99));  // another seed places files differently
}

TEST_CASE("staged outputs appear together, and a failed set leaves the previous files and no temporaries",
          "[outputs]") {
  test::TempDir t;
  test::write_text(t / "a.txt", "old a");
  test::write_text(t / "b.txt", "old b");
  auto listing = [&] {
    std::vector<std::string> names;
    for (const auto& e : std::filesystem::directory_iterator(t.path())) names.push_back(e.path().filename().string());
    std::sort(names.begin(), names.end());
    return names;
  };
  auto content = [&](const char* name) {
    std::ifstream is(t / name);
    return std::string((std::istreambuf_iterator<char>(is)), {});
  };
  {  // the second file fails while it is written: nothing is put in place
    StagedFiles staged;
    staged.write(t / "a.txt", [](std::ostream& os) { os << "new a"; });
    CHECK_THROWS(staged.write(t / "b.txt", [](std::ostream&) { throw std::runtime_error("disk full"); }));
    CHECK(content("a.txt") == "old a");  // written, not yet committed
  }
  CHECK(content("a.txt") == "old a");
  CHECK(content("b.txt") == "old b");
  CHECK(listing() == std::vector<std::string>{"a.txt", "b.txt"});
  StagedFiles staged;
  staged.write(t / "a.txt", [](std::ostream& os) { os << "new a"; });
  staged.write(t / "b.txt", [](std::ostream& os) { os << "new b"; });
  CHECK(content("a.txt") == "old a");
  staged.commit();
  CHECK(content("a.txt") == "new a");
  CHECK(content("b.txt") == "new b");
  CHECK(listing() == std::vector<std::string>{"a.txt", "b.txt"});
}

TEST_CASE("report.json written with the findings' paths streamed equals nlohmann::json's own dump", "[outputs]") {
  // The reference is nlohmann::json's serialiser (dump with indent 2) of the full
  // report; the streamed writer must give the same bytes, and the page the same
  // HTML, on the demo set and on findings whose paths need escaping (quotes,
  // backslashes, control characters, invalid UTF-8, non-ASCII names).
  test::TempDir t;
  write_demo(t.path());
  AuditSettings s;
  s.root = t.path();
  s.read.threads = 2;
  AuditResult r = run_audit(s);
  REQUIRE(!r.findings.empty());
  auto check = [](const AuditResult& res) {
    std::string streamed;
    const nlohmann::json slim = build_report_without_paths(res);
    write_report_json(streamed, slim, res.findings);
    const nlohmann::json full = build_report(res);
    CHECK(streamed == dump_json(full) + "\n");
    CHECK(render_html(slim, {}, &res.findings) == render_html(full));
  };
  check(r);
  Finding odd;
  odd.code = "zz-odd-names";
  odd.severity = Severity::info;
  odd.message = "names that need escaping";
  odd.paths = {"a/quote\"d.png", "a/back\\slash.png", std::string("a/ctrl\x01\x1f.png"), "a/\xff\xfe invalid.png",
               "a/\xc3\xa9t\xc3\xa9.png", "a/del\x7f.png", "a/\x01paths"};
  r.findings.push_back(odd);
  Finding none;
  none.code = "zz-no-paths";
  none.message = "a finding that names no file";
  none.details = {{"path", "\x01paths"}};
  r.findings.push_back(none);
  check(r);
  // Compared with a baseline: each finding gains a "baseline" member.
  r.baseline.present = true;
  r.known.assign(r.findings.size(), false);
  for (size_t k = 0; k < r.known.size(); k += 2) r.known[k] = true;
  check(r);
}

TEST_CASE("the output layer refuses every target inside ROOT, whoever calls it, and writes nothing", "[outputs]") {
  // The CLI checks early too; this holds the guard where the files are written.
  test::TempDir t;
  const std::filesystem::path root = t / "data";
  write_demo(root);
  AuditSettings s;
  s.root = root;
  const AuditResult r = run_audit(s);
  auto count_files = [&] {
    size_t n = 0;
    for (const auto& e : std::filesystem::recursive_directory_iterator(root)) n += e.is_regular_file();
    return n;
  };
  const size_t before = count_files();
  CHECK_THROWS_AS(write_outputs(root / "out", r), InsideRootError);
  CHECK_THROWS_AS(write_outputs(root, r), InsideRootError);
  CHECK_THROWS_AS(write_outputs(t / "elsewhere", r, kThumbnailBudget, nullptr, root / "j.xml"), InsideRootError);
  CHECK(count_files() == before);
  CHECK_FALSE(std::filesystem::exists(root / "out"));
  CHECK_FALSE(std::filesystem::exists(t / "elsewhere"));  // refused before the folder is made
  // A JUnit file that cannot be written (its folder is missing) fails the whole
  // set: none of the five files lands.
  CHECK_THROWS(write_outputs(t / "elsewhere", r, kThumbnailBudget, nullptr, t / "missing" / "j.xml"));
  CHECK_FALSE(std::filesystem::exists(t / "elsewhere" / "manifest.csv"));
  // Outside ROOT, the four files and the JUnit file land together.
  write_outputs(t / "elsewhere", r, kThumbnailBudget, nullptr, t / "j.xml");
  CHECK(std::filesystem::exists(t / "elsewhere" / "manifest.csv"));
  CHECK(std::filesystem::exists(t / "j.xml"));
}

TEST_CASE("an interrupted run leaves no temporaries, and stale ones of dead runs are removed", "[outputs][fault]") {
  test::TempDir t;
  // A child that has staged an output (not committed) and is then sent SIGTERM:
  // it dies of the signal, and its temporary is gone.
  const pid_t child = fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    install_interrupt_cleanup();
    StagedFiles staged;
    staged.write(t / "manifest.csv", [](std::ostream& os) { os << "half a set"; });
    raise(SIGTERM);
    _exit(0);  // not reached
  }
  int status = 0;
  REQUIRE(waitpid(child, &status, 0) == child);
  CHECK(WIFSIGNALED(status));
  CHECK(WTERMSIG(status) == SIGTERM);
  size_t left = 0;
  for (const auto& e : std::filesystem::directory_iterator(t.path())) left += e.path().filename().string().find(".tmp-") != std::string::npos;
  CHECK(left == 0);
  CHECK_FALSE(std::filesystem::exists(t / "manifest.csv"));
  // What a SIGKILLed run leaves (its PID no longer runs) is removed before the next
  // set is written; a live process's temporaries and other files are left alone.
  test::write_text(t / "manifest.csv.tmp-999999999", "stale");
  test::write_text(t / ("report.json.tmp-" + std::to_string(getpid())), "live");
  test::write_text(t / "notes.txt.tmp-999999999", "not ours");
  CHECK(remove_stale_temporaries(t.path(), {"manifest.csv", "report.json"}) == 1);
  CHECK_FALSE(std::filesystem::exists(t / "manifest.csv.tmp-999999999"));
  CHECK(std::filesystem::exists(t / ("report.json.tmp-" + std::to_string(getpid()))));
  CHECK(std::filesystem::exists(t / "notes.txt.tmp-999999999"));
}
