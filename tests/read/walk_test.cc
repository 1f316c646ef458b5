// Walk tests: order, links, loops, hidden and stray files.
#include <catch2/catch.hpp>

#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <filesystem>

#include "support/temp_tree.h"
#include "tamis/read/read_stage.h"
#include "tamis/read/walk.h"
#include "tamis/relate/labels.h"

using namespace tamis;
namespace fs = std::filesystem;

TEST_CASE("walk lists every regular file once, in bytewise order, whatever the creation order", "[walk]") {
  test::TempDir a, b;
  // Bytewise order puts 'B' (0x42) before 'a' (0x61), '-' before '_', and UTF-8 after ASCII.
  std::vector<std::string> names{"a/x.png", "B/y.png", "a-b/z.png", "a_b/z.png", "a/\xc3\xa9t\xc3\xa9.png",
                                 "a/ 1.png", "a/sub/deep/q.png", "top.txt"};
  for (const auto& n : names) test::write_text(a / n, n);
  for (auto it = names.rbegin(); it != names.rend(); ++it) test::write_text(b / *it, *it);
  std::vector<std::string> expect = names;
  std::sort(expect.begin(), expect.end(), [](const std::string& x, const std::string& y) {
    return std::lexicographical_compare(x.begin(), x.end(), y.begin(), y.end(),
                                        [](char p, char q) { return (unsigned char)p < (unsigned char)q; });
  });
  for (auto* t : {&a, &b}) {
    WalkResult w = walk_tree(t->path());
    std::vector<std::string> got;
    for (const auto& e : w.files) got.push_back(e.path);
    CHECK(got == expect);
  }
}

TEST_CASE("walk never follows links: no escape from ROOT, loops survived", "[walk][links]") {
  test::TempDir outside, t;
  test::write_text(outside / "secret.png", "outside");
  test::write_text(t / "cls/a.png", "a");
  fs::create_directory_symlink(outside.path(), t / "cls/escape");
  fs::create_directory_symlink(t.path(), t / "cls/loop");
  fs::create_symlink(t / "cls/a.png", t / "cls/alias.png");
  WalkResult w = walk_tree(t.path());
  REQUIRE(w.files.size() == 1);
  CHECK(w.files[0].path == "cls/a.png");
  CHECK(w.links == std::vector<std::string>{"cls/alias.png", "cls/escape", "cls/loop"});
}

TEST_CASE("hidden files and folders are recognised", "[walk]") {
  CHECK(is_hidden_path(".DS_Store"));
  CHECK(is_hidden_path("cls/.thumbs/a.png"));
  CHECK(is_hidden_path(".git/objects/aa"));
  CHECK_FALSE(is_hidden_path("cls/a.png"));
  CHECK_FALSE(is_hidden_path("cls/a.b.png"));
}

TEST_CASE("path_is_inside refuses outputs inside ROOT", "[walk]") {
  test::TempDir t;
  fs::create_directories(t / "data/cls");
  CHECK(path_is_inside(t / "data", t / "data"));
  CHECK(path_is_inside(t / "data", t / "data/cls/out"));
  CHECK(path_is_inside(t / "data", t / "data/../data/new"));
  CHECK_FALSE(path_is_inside(t / "data", t / "data-out"));
  CHECK_FALSE(path_is_inside(t / "data", t.path()));
}

TEST_CASE("labels come from the first folder, split folders are recognised", "[labels]") {
  auto rec = [](std::string p) {
    FileRecord r;
    r.path = std::move(p);
    r.kind = FileKind::image;
    return r;
  };
  SECTION("class folders") {
    std::vector<FileRecord> rs{rec("oak/a.png"), rec("oak/batch2/b.png"), rec("pine/c.png"), rec("loose.png")};
    Labelling l = assign_labels(rs);
    CHECK_FALSE(l.pre_split);
    CHECK(l.names == std::vector<std::string>{"oak", "pine"});
    CHECK(l.label_of == std::vector<int32_t>{0, 0, 1, -1});
  }
  SECTION("a pre-split tree") {
    std::vector<FileRecord> rs{rec("Train/oak/a.png"), rec("train/pine/b.png"), rec("validation/oak/c.png"),
                               rec("test/pine/d.png"), rec("test/e.png")};
    Labelling l = assign_labels(rs);
    CHECK(l.pre_split);
    CHECK(l.names == std::vector<std::string>{"oak", "pine"});
    CHECK(l.label_of == std::vector<int32_t>{0, 1, 0, 1, -1});
    CHECK(l.given_split == std::vector<SplitName>{SplitName::train, SplitName::train, SplitName::val,
                                                  SplitName::test, SplitName::test});
  }
  SECTION("a class named like a split does not make the tree pre-split") {
    std::vector<FileRecord> rs{rec("test/a.png"), rec("oak/b.png")};
    CHECK_FALSE(assign_labels(rs).pre_split);
  }
}

TEST_CASE("a walk that does not stat lists the same files, and the read stage stamps them as stat(2) does",
          "[walk][read]") {
  // The reference is the stat(2) system call itself, on each path.
  test::TempDir t;
  for (const char* n : {"a/x.png", "a/y.txt", "b/.hidden.png", ".top/z.png", "b/sub/w.jpg"})
    test::write_text(t / n, std::string(n) + " some bytes");
  fs::create_symlink(t / "a/x.png", t / "a/alias.png");
  WalkResult with = walk_tree(t.path(), 2, true), without = walk_tree(t.path(), 2, false);
  REQUIRE(with.files.size() == 5);
  REQUIRE(without.files.size() == with.files.size());
  CHECK(without.links == with.links);
  ReadOptions ro;
  ro.threads = 2;
  std::vector<FileRecord> a = read_files(t.path(), with.files, ro), b = read_files(t.path(), without.files, ro);
  for (size_t i = 0; i < with.files.size(); ++i) {
    INFO(with.files[i].path);
    CHECK(with.files[i].stamped);
    CHECK_FALSE(without.files[i].stamped);
    CHECK(without.files[i].path == with.files[i].path);
    struct stat st {};
    REQUIRE(lstat((t / with.files[i].path).c_str(), &st) == 0);
    for (const FileRecord* r : {&a[i], &b[i]}) {
      CHECK(r->size == static_cast<uint64_t>(st.st_size));
      CHECK(r->mtime_ns == static_cast<int64_t>(st.st_mtim.tv_sec) * 1000000000LL + st.st_mtim.tv_nsec);
      CHECK(r->inode == st.st_ino);
    }
    CHECK(a[i].kind == b[i].kind);
    CHECK(a[i].defect == b[i].defect);
  }
}

TEST_CASE("stamping after the listing: files changed in between go where their stat says", "[walk]") {
  // Truth constructed here: between the listing and the stamping one file is
  // removed, one replaced by a symbolic link and one by a folder.
  test::TempDir t;
  for (const char* n : {"c/a.png", "c/b.png", "c/gone.png", "c/link.png", "c/now_dir.png"}) test::write_text(t / n, n);
  WalkResult w = walk_tree(t.path(), 2, false);
  REQUIRE(w.files.size() == 5);
  fs::remove(t / "c/gone.png");
  fs::remove(t / "c/link.png");
  fs::create_symlink(t / "c/a.png", t / "c/link.png");
  fs::remove(t / "c/now_dir.png");
  fs::create_directory(t / "c/now_dir.png");
  stamp_files(t.path(), w, 2);
  std::vector<std::string> files;
  for (const auto& e : w.files) {
    files.push_back(e.path);
    CHECK(e.stamped);
    struct stat st {};
    REQUIRE(lstat((t / e.path).c_str(), &st) == 0);
    CHECK(e.size == static_cast<uint64_t>(st.st_size));
    CHECK(e.inode == st.st_ino);
  }
  CHECK(files == std::vector<std::string>{"c/a.png", "c/b.png"});
  CHECK(w.links == std::vector<std::string>{"c/link.png"});
  CHECK(w.unreadable_dirs == std::vector<std::string>{"c/gone.png", "c/now_dir.png"});
}
