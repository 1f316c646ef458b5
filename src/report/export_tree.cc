#include "tamis/report/export_tree.h"

#include <fcntl.h>
#include <signal.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>
#include <map>
#include <set>
#include <vector>

#include <nlohmann/json.hpp>
#include <xxhash.h>

#include "tamis/base/atomic_file.h"
#include "tamis/base/text.h"
#include "tamis/place/manifest_reader.h"
#include "tamis/read/walk.h"
#include "tamis/report/outputs.h"
#include "tamis/version.h"

namespace tamis {
namespace fs = std::filesystem;

namespace {

constexpr const char* kSplitNames[3] = {"train", "val", "test"};

[[noreturn]] void refuse(const std::string& what) { throw ExportError(2, what); }
[[noreturn]] void fail(const std::string& what) { throw ExportError(3, what); }


// DIR's manifest.csv and report.json as one whole set (tamis-set.json lists them
// with the sizes and XXH3-64 they have).
void check_whole_set(const fs::path& dir) {
  const fs::path set_file = dir / kSetFileName;
  std::ifstream is(set_file, std::ios::binary);
  if (!is) fail(dir.string() + " holds no " + kSetFileName + ": it is not the --out folder of a finished audit or split");
  nlohmann::json set;
  try {
    set = nlohmann::json::parse(is);
  } catch (const std::exception&) {
    fail(set_file.string() + " is damaged (not JSON)");
  }
  auto text_at = [](const nlohmann::json& f, const char* key) {
    return f.contains(key) && f[key].is_string() ? f[key].get<std::string>() : std::string();
  };
  for (const char* name : {"manifest.csv", "report.json"}) {
    bool listed = false;
    if (set.is_object() && set.contains("files") && set["files"].is_array())
      for (const auto& f : set["files"]) {
        if (!f.is_object() || text_at(f, "name") != name) continue;
        listed = true;
        uint64_t bytes = 0, hash = 0;
        const int err = hash_file(dir / name, bytes, hash);
        if (err != 0) fail(std::string("cannot read ") + (dir / name).string() + ": " + std::strerror(err));
        if (!f.contains("bytes") || !f["bytes"].is_number_unsigned() || f["bytes"].get<uint64_t>() != bytes ||
            text_at(f, "xxh3_64") != hex64(hash))
          fail((dir / name).string() + " is not the file its set was written with (changed since, or from another run)");
      }
    if (!listed) fail(std::string(name) + " is not listed in " + set_file.string());
  }
}

// ROOT as report.json records it (absolute; unescaped where `escaped` says so).
fs::path root_of(const fs::path& dir) {
  std::ifstream is(dir / "report.json", std::ios::binary);
  nlohmann::json j;
  try {
    j = nlohmann::json::parse(is);
    const auto& r = j.at("root");
    std::string path = r.at("path").get<std::string>();
    if (r.at("escaped").get<bool>()) {
      auto bytes = unescape_name(path);
      if (!bytes) fail((dir / "report.json").string() + ": root.path has a broken percent escape");
      path = *bytes;
    }
    if (path.empty() || path[0] != '/') fail((dir / "report.json").string() + ": root.path is not absolute");
    return fs::path(path);
  } catch (const ExportError&) {
    throw;
  } catch (const std::exception&) {
    fail((dir / "report.json").string() + " records no ROOT (written by a version before ROOT was recorded: audit again)");
  }
}

// A relative name that stays in its folder: no empty, "." or ".." component, not absolute.
bool stays_inside(const std::string& name) {
  if (name.empty() || name[0] == '/') return false;
  size_t start = 0;
  while (start <= name.size()) {
    size_t slash = name.find('/', start);
    if (slash == std::string::npos) slash = name.size();
    const std::string_view part(name.data() + start, slash - start);
    if (part.empty() || part == "." || part == "..") return false;
    start = slash + 1;
  }
  return true;
}

std::string base_name(const std::string& path) {
  const size_t slash = path.rfind('/');
  return slash == std::string::npos ? path : path.substr(slash + 1);
}

// A name's stem and extension ("a.tar.png" -> "a.tar", ".png"; ".hidden" -> ".hidden", "").
std::pair<std::string, std::string> split_extension(const std::string& name) {
  const size_t dot = name.rfind('.');
  if (dot == std::string::npos || dot == 0) return {name, ""};
  return {name.substr(0, dot), name.substr(dot)};
}

std::string distinct_name(const std::string& name, const std::string& path) {
  const auto [stem, ext] = split_extension(name);
  return stem + "~" + hex64(XXH3_64bits(path.data(), path.size())) + ext;
}

// Hidden siblings of TREE that a killed export left (.NAME.tamis-export-PID,
// .NAME.tamis-old-PID whose process is gone).
void remove_stale_siblings(const fs::path& parent, const std::string& name) {
  std::error_code ec;
  for (const auto& e : fs::directory_iterator(parent, ec)) {
    const std::string n = e.path().filename().string();
    for (const std::string& prefix : {"." + name + ".tamis-export-", "." + name + ".tamis-old-"}) {
      if (n.size() <= prefix.size() || n.compare(0, prefix.size(), prefix) != 0) continue;
      const std::string pid = n.substr(prefix.size());
      if (pid.find_first_not_of("0123456789") != std::string::npos || pid.size() > 9) continue;
      const pid_t p = static_cast<pid_t>(std::stol(pid));
      if (p != getpid() && kill(p, 0) != 0 && errno == ESRCH) fs::remove_all(e.path(), ec);
    }
  }
}

struct Entry {
  const ManifestRow* row;
  std::string folder;  // <split>/<label>
  std::string name;    // the image entry's name
  std::string mask;    // the mask entry's name (empty: none)
};

}  // namespace

const char* to_string(ExportMode m) {
  switch (m) {
    case ExportMode::symlink: return "symlink";
    case ExportMode::hardlink: return "hardlink";
    case ExportMode::copy: return "copy";
  }
  return "symlink";
}

ExportResult export_tree(const ExportSettings& s) {
  ExportResult out;
  std::error_code ec;
  const fs::path dir = fs::absolute(s.outputs, ec).lexically_normal();
  fs::path tree = fs::absolute(s.tree, ec).lexically_normal();
  if (tree.has_parent_path() && !tree.has_filename()) tree = tree.parent_path();
  if (tree == tree.root_path()) refuse("--to / : the tree needs a folder of its own");
  out.tree = tree;
  // Before anything is read: the places TREE may not be.
  check_whole_set(dir);
  const fs::path root = root_of(dir);
  out.root = root;
  try {
    refuse_inside_root(root, tree, "--to");
  } catch (const InsideRootError& e) {
    refuse(e.what());
  }
  if (path_is_inside(tree, root)) refuse("--to " + tree.string() + " holds ROOT " + root.string());
  if (path_is_inside(tree, dir)) refuse("--to " + tree.string() + " holds the outputs folder " + dir.string());
  struct stat st {};
  const bool exists = lstat(tree.c_str(), &st) == 0;
  bool empty = true;
  if (exists) {
    if (S_ISLNK(st.st_mode)) refuse("--to " + tree.string() + " is a symbolic link; name the folder itself");
    if (!S_ISDIR(st.st_mode)) refuse("--to " + tree.string() + " exists and is not a folder");
    empty = fs::is_empty(tree, ec);
    if (!empty) {
      if (!fs::is_regular_file(tree / kExportMarker, ec))
        refuse("--to " + tree.string() + " is not empty and was not made by tamis export; choose an empty or new folder");
      if (!s.replace) refuse("--to " + tree.string() + " holds an earlier export; --replace replaces it");
    }
  }
  // The rows to export, with distinct names.
  std::vector<ManifestRow> rows;
  {
    std::ifstream is(dir / "manifest.csv", std::ios::binary);
    try {
      rows = read_manifest_rows(is);
    } catch (const std::exception& e) {
      fail((dir / "manifest.csv").string() + ": " + e.what());
    }
  }
  std::vector<Entry> entries;
  for (const auto& r : rows) {
    if (r.split == Placement::excluded) continue;
    if (!stays_inside(r.path) || !stays_inside(r.label) || (!r.mask_path.empty() && !stays_inside(r.mask_path)))
      refuse("manifest row '" + r.path + "' names a file or class outside its folder");
    entries.push_back({&r, std::string(kSplitNames[static_cast<int>(r.split)]) + "/" + r.label, base_name(r.path), {}});
  }
  auto mask_name = [](const Entry& e) {
    return split_extension(e.name).first + split_extension(base_name(e.row->mask_path)).second;
  };
  // Names that collide in one folder become distinct: first the images', then
  // the masks' (which follow their images' stems; a distinct name is unique, so
  // making a mask's image distinct settles its mask too).
  std::vector<bool> distinct(entries.size(), false);
  auto make_distinct = [&](std::string Entry::*field) {
    std::map<std::pair<std::string, std::string>, int> seen;
    for (const auto& e : entries)
      if (!(e.*field).empty()) ++seen[{e.folder, e.*field}];
    for (size_t k = 0; k < entries.size(); ++k) {
      auto& e = entries[k];
      if (distinct[k] || (e.*field).empty() || seen[{e.folder, e.*field}] < 2) continue;
      distinct[k] = true;
      ++out.renamed;
      e.name = distinct_name(base_name(e.row->path), e.row->path);
    }
    for (auto& e : entries) e.mask = e.row->mask_path.empty() ? std::string() : mask_name(e);
  };
  make_distinct(&Entry::name);
  make_distinct(&Entry::mask);
  // Build beside TREE, hidden, then rename into place.
  const fs::path parent = tree.parent_path();
  fs::create_directories(parent, ec);
  if (ec) fail("cannot create " + parent.string() + ": " + ec.message());
  const std::string name = tree.filename().string();
  remove_stale_siblings(parent, name);
  const fs::path staging = parent / ("." + name + ".tamis-export-" + std::to_string(getpid()));
  fs::remove_all(staging, ec);
  if (!fs::create_directory(staging, ec) || ec) fail("cannot create " + staging.string() + ": " + ec.message());
  try {
    std::set<std::string> made;
    auto make_folder = [&](const fs::path& p) {
      if (made.insert(p.string()).second) {
        std::error_code e2;
        fs::create_directories(p, e2);
        if (e2) fail("cannot create " + p.string() + ": " + e2.message());
      }
    };
    uint64_t missing = 0;
    std::string first_missing;
    auto place = [&](const std::string& rel_source, const fs::path& target) {
      const fs::path source = root / rel_source;
      struct stat sst {};
      if (stat(source.c_str(), &sst) != 0 || !S_ISREG(sst.st_mode)) {
        if (missing++ == 0) first_missing = rel_source;
        return;
      }
      int rc = 0;
      if (s.mode == ExportMode::symlink) {
        rc = ::symlink(source.c_str(), target.c_str());
      } else if (s.mode == ExportMode::hardlink) {
        rc = ::link(source.c_str(), target.c_str());
        if (rc != 0 && errno == EXDEV)
          fail("hard links cannot cross file systems: ROOT " + root.string() + " and --to " + tree.string() +
               " are on different ones; use --mode symlink or --mode copy");
      } else {
        std::error_code e2;
        fs::copy_file(source, target, e2);
        if (e2) fail("cannot copy " + source.string() + " to " + target.string() + ": " + e2.message());
      }
      if (rc != 0) fail("cannot make " + target.string() + ": " + std::strerror(errno));
    };
    for (const auto& e : entries) {
      make_folder(staging / e.folder);
      place(e.row->path, staging / e.folder / e.name);
      ++out.images[static_cast<size_t>(e.row->split)];
      if (!e.mask.empty()) {
        make_folder(staging / "masks" / e.folder);
        place(e.row->mask_path, staging / "masks" / e.folder / e.mask);
        ++out.masks;
      }
    }
    if (missing > 0)
      fail(std::to_string(missing) + " file" + (missing == 1 ? " listed in the manifest is" : "s listed in the manifest are") +
           " missing from ROOT (the first: " + first_missing + "); the tree changed after the audit: audit again");
    // The lists: absolute paths of the entries as they will be, one a line.
    for (int sp = 0; sp < 3; ++sp) {
      std::ofstream os(staging / (std::string(kSplitNames[sp]) + ".txt"), std::ios::binary);
      for (const auto& e : entries) {
        if (static_cast<int>(e.row->split) != sp) continue;
        const std::string line = (tree / e.folder / e.name).string();
        if (line.find_first_of("\r\n") != std::string::npos) {
          ++out.unlisted;
          continue;
        }
        os << line << '\n';
      }
      os.flush();
      if (!os) fail("cannot write " + (staging / (std::string(kSplitNames[sp]) + ".txt")).string());
    }
    nlohmann::json marker = {{"format", "tamis export"},
                             {"version", 1},
                             {"tool", {{"name", kToolName}, {"version", kToolVersion}}},
                             {"outputs", dir.string()},
                             {"root", root.string()},
                             {"mode", to_string(s.mode)},
                             {"images", {{"train", out.images[0]}, {"val", out.images[1]}, {"test", out.images[2]}}},
                             {"masks", out.masks},
                             {"renamed", out.renamed}};
    std::ofstream os(staging / kExportMarker, std::ios::binary);
    os << marker.dump(1, ' ', false, nlohmann::json::error_handler_t::replace) << '\n';
    os.flush();
    if (!os) fail("cannot write " + (staging / kExportMarker).string());
  } catch (...) {
    fs::remove_all(staging, ec);
    throw;
  }
  // Into place: an empty TREE is removed first; an earlier export is moved aside,
  // replaced, then removed.
  if (exists && empty) fs::remove(tree, ec);
  if (exists && !empty) {
    const fs::path old = parent / ("." + name + ".tamis-old-" + std::to_string(getpid()));
    fs::remove_all(old, ec);
    if (::rename(tree.c_str(), old.c_str()) != 0) {
      const int err = errno;
      fs::remove_all(staging, ec);
      fail("cannot move the earlier export " + tree.string() + " aside: " + std::strerror(err));
    }
    if (::rename(staging.c_str(), tree.c_str()) != 0) {
      const int err = errno;
      ::rename(old.c_str(), tree.c_str());
      fs::remove_all(staging, ec);
      fail("cannot rename " + staging.string() + " to " + tree.string() + ": " + std::strerror(err));
    }
    fs::remove_all(old, ec);
    out.replaced = true;
    return out;
  }
  if (::rename(staging.c_str(), tree.c_str()) != 0) {
    const int err = errno;
    fs::remove_all(staging, ec);
    fail("cannot rename " + staging.string() + " to " + tree.string() + ": " + std::strerror(err));
  }
  return out;
}

}  // namespace tamis
