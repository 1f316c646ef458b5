#include "tamis/read/walk.h"

#include <dirent.h>
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <set>
#include <stdexcept>
#include <utility>

#include "tamis/base/parallel.h"

namespace tamis {
namespace {

struct DirGuard {
  DIR* d;
  ~DirGuard() {
    if (d) closedir(d);
  }
};

int64_t to_ns(const struct timespec& ts) {
  return static_cast<int64_t>(ts.tv_sec) * 1000000000LL + ts.tv_nsec;
}

// Lists one folder at a time, closing it before descending, so deep trees cost
// no more open descriptors than one; folders are visited depth-first in bytewise
// order (the final order comes from sorting anyway). The file system's entry
// types sort the entries; regular files are stat'ed afterwards (stamp_files).
class TreeWalker {
 public:
  TreeWalker(int rootfd, WalkResult& out) : rootfd_(rootfd), out_(out) {}

  void run() {
    std::vector<std::string> stack{""};
    while (!stack.empty()) {
      std::string rel = std::move(stack.back());
      stack.pop_back();
      std::vector<std::string> subdirs = list_dir(rel);
      for (auto it = subdirs.rbegin(); it != subdirs.rend(); ++it) stack.push_back(std::move(*it));
    }
    out_.files.reserve(out_.files.size() + pending_.size());
    for (auto& p : pending_) {  // typed as regular files by the listing; stamped later
      WalkEntry w;
      w.path = std::move(p);
      w.stamped = false;
      out_.files.push_back(std::move(w));
    }
  }

 private:
  // Lists folder `rel`; returns its sub-folders' relative paths in bytewise order.
  std::vector<std::string> list_dir(const std::string& rel) {
    std::vector<std::string> subdirs;
    int dirfd = rel.empty() ? dup(rootfd_)
                            : openat(rootfd_, rel.c_str(), O_RDONLY | O_DIRECTORY | O_NOFOLLOW | O_CLOEXEC);
    if (dirfd < 0) {
      out_.unreadable_dirs.push_back(rel);
      return subdirs;
    }
    struct stat st {};
    if (fstat(dirfd, &st) != 0 || !visited_.insert({st.st_dev, st.st_ino}).second) {
      close(dirfd);
      return subdirs;
    }
    DIR* d = fdopendir(dirfd);
    if (!d) {
      close(dirfd);
      out_.unreadable_dirs.push_back(rel);
      return subdirs;
    }
    DirGuard guard{d};
    if (!rel.empty()) out_.dirs.push_back(rel);
    while (struct dirent* e = readdir(d)) {
      const char* name = e->d_name;
      if (std::strcmp(name, ".") == 0 || std::strcmp(name, "..") == 0) continue;
      std::string child = rel.empty() ? std::string(name) : rel + "/" + name;
      // The entry's type from the folder itself where the file system gives it;
      // regular files are stat'ed later, all at once and in parallel.
      switch (e->d_type) {
        case DT_REG: pending_.push_back(std::move(child)); continue;
        case DT_DIR: subdirs.push_back(std::move(child)); continue;
        case DT_LNK: out_.links.push_back(std::move(child)); continue;
        case DT_UNKNOWN: break;
        default: out_.special.push_back(std::move(child)); continue;  // sockets, FIFOs, devices: never opened
      }
      struct stat cst {};
      if (fstatat(dirfd, name, &cst, AT_SYMLINK_NOFOLLOW) != 0) {
        out_.unreadable_dirs.push_back(std::move(child));  // vanished or unreadable entry
        continue;
      }
      if (S_ISLNK(cst.st_mode)) {
        out_.links.push_back(std::move(child));
      } else if (S_ISDIR(cst.st_mode)) {
        subdirs.push_back(std::move(child));
      } else if (!S_ISREG(cst.st_mode)) {
        out_.special.push_back(std::move(child));
      } else {  // a regular file, stat'ed already: stamped now, not again later
        WalkEntry w;
        w.path = std::move(child);
        w.size = static_cast<uint64_t>(cst.st_size);
        w.mtime_ns = to_ns(cst.st_mtim);
        w.inode = cst.st_ino;
        w.device = cst.st_dev;
        out_.files.push_back(std::move(w));
      }
    }
    std::sort(subdirs.begin(), subdirs.end());
    return subdirs;
  }

  int rootfd_;
  WalkResult& out_;
  std::set<std::pair<dev_t, ino_t>> visited_;
  std::vector<std::string> pending_;  // files the listing typed as regular: not stat'ed yet
};

}  // namespace

WalkResult walk_tree(const std::filesystem::path& root, unsigned threads, bool stat_files) {
  int fd = open(root.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (fd < 0) {
    throw std::runtime_error("cannot open folder " + root.string() + ": " + std::strerror(errno));
  }
  WalkResult out;
  TreeWalker(fd, out).run();
  close(fd);
  auto by_path = [](const WalkEntry& a, const WalkEntry& b) { return a.path < b.path; };
  std::sort(out.files.begin(), out.files.end(), by_path);
  std::sort(out.links.begin(), out.links.end());
  std::sort(out.special.begin(), out.special.end());
  std::sort(out.unreadable_dirs.begin(), out.unreadable_dirs.end());
  std::sort(out.dirs.begin(), out.dirs.end());
  if (stat_files) stamp_files(root, out, threads);
  return out;
}

void stamp_files(const std::filesystem::path& root, WalkResult& walk, unsigned threads) {
  int fd = open(root.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (fd < 0) {
    throw std::runtime_error("cannot open folder " + root.string() + ": " + std::strerror(errno));
  }
  // Size, time and inode of every file not yet stamped: one fstatat each, on all
  // threads. An entry that changed since it was listed goes where its stat says.
  auto& files = walk.files;
  std::vector<struct stat> st(files.size());
  std::vector<uint8_t> ok(files.size(), 0);
  parallel_for(files.size(), threads, [&](size_t i) {
    if (!files[i].stamped) ok[i] = fstatat(fd, files[i].path.c_str(), &st[i], AT_SYMLINK_NOFOLLOW) == 0;
  }, 256);
  close(fd);
  size_t kept = 0;
  bool moved = false;
  for (size_t i = 0; i < files.size(); ++i) {
    WalkEntry& w = files[i];
    if (!w.stamped) {
      if (!ok[i] || S_ISDIR(st[i].st_mode)) {
        walk.unreadable_dirs.push_back(std::move(w.path));  // vanished, unreadable or replaced by a folder
        moved = true;
        continue;
      }
      if (S_ISLNK(st[i].st_mode)) {
        walk.links.push_back(std::move(w.path));
        moved = true;
        continue;
      }
      if (!S_ISREG(st[i].st_mode)) {  // a FIFO, socket or device now: not a file of the set
        walk.special.push_back(std::move(w.path));
        moved = true;
        continue;
      }
      w.size = static_cast<uint64_t>(st[i].st_size);
      w.mtime_ns = to_ns(st[i].st_mtim);
      w.inode = st[i].st_ino;
      w.device = st[i].st_dev;
      w.stamped = true;
    }
    if (kept != i) files[kept] = std::move(w);
    ++kept;
  }
  files.resize(kept);
  if (moved) {
    std::sort(walk.links.begin(), walk.links.end());
    std::sort(walk.special.begin(), walk.special.end());
    std::sort(walk.unreadable_dirs.begin(), walk.unreadable_dirs.end());
  }
}

bool path_is_inside(const std::filesystem::path& root, const std::filesystem::path& child) {
  auto parts = [](const std::filesystem::path& p) {
    std::error_code ec;
    auto c = std::filesystem::weakly_canonical(p, ec);
    if (ec) c = std::filesystem::absolute(p).lexically_normal();
    std::vector<std::string> out;
    for (const auto& part : c)
      if (!part.empty() && part != ".") out.push_back(part.string());
    return out;
  };
  auto r = parts(root), c = parts(child);
  if (r.size() <= c.size() && std::equal(r.begin(), r.end(), c.begin())) return true;
  // The same folder can have two paths: a bind mount of ROOT (or of a folder
  // above it) names it elsewhere. So the child's nearest existing folder and each
  // folder above it are also compared with ROOT by device and inode.
  struct stat rs {};
  if (::stat(root.c_str(), &rs) != 0) return false;
  std::error_code ec;
  std::filesystem::path p = std::filesystem::weakly_canonical(child, ec);
  if (ec) p = std::filesystem::absolute(child).lexically_normal();
  for (;;) {
    struct stat ps {};
    if (::stat(p.c_str(), &ps) == 0 && ps.st_dev == rs.st_dev && ps.st_ino == rs.st_ino) return true;
    if (!p.has_parent_path() || p.parent_path() == p) return false;
    p = p.parent_path();
  }
}

}  // namespace tamis
