#include "tamis/relate/masks.h"

#include <algorithm>
#include <cctype>
#include <map>
#include <set>
#include <string_view>

namespace tamis {

namespace {

const std::set<std::string>& mask_words() {
  static const std::set<std::string> w{"mask", "masks", "label", "labels", "annotation", "annotations", "gt",
                                       "groundtruth", "ground_truth", "ground-truth", "seg", "segmentation",
                                       "segmentations", "trimap", "trimaps", "alpha", "matte", "mattes"};
  return w;
}

std::string lower(std::string s) {
  for (auto& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

bool is_sep(char c) { return c == ' ' || c == '_' || c == '-' || c == '.'; }

// A token: 1..16 letters or digits.
bool is_token(std::string_view t) {
  if (t.empty() || t.size() > 16) return false;
  return std::all_of(t.begin(), t.end(), [](char c) { return std::isalnum(static_cast<unsigned char>(c)); });
}

bool has_letter(std::string_view t) {
  return std::any_of(t.begin(), t.end(), [](char c) { return std::isalpha(static_cast<unsigned char>(c)); });
}

// b == a + sep + token, or token + sep + a.
bool differs_by_token(const std::string& a, const std::string& b) {
  if (b.size() < a.size() + 2) return false;
  if (b.compare(0, a.size(), a) == 0 && is_sep(b[a.size()]) && is_token(std::string_view(b).substr(a.size() + 1)))
    return true;
  size_t cut = b.size() - a.size();
  return b.compare(cut, a.size(), a) == 0 && is_sep(b[cut - 1]) && is_token(std::string_view(b).substr(0, cut - 1));
}

std::string parent_of(const std::string& p) {
  size_t s = p.rfind('/');
  return s == std::string::npos ? "" : p.substr(0, s);
}
std::string name_of(const std::string& p) {
  size_t s = p.rfind('/');
  return s == std::string::npos ? p : p.substr(s + 1);
}
std::string drop_ext(const std::string& p) {
  size_t slash = p.rfind('/');
  size_t dot = p.rfind('.');
  if (dot == std::string::npos || (slash != std::string::npos && dot < slash) || dot == (slash == std::string::npos ? 0 : slash + 1))
    return p;
  return p.substr(0, dot);
}
// "0001_mask" -> "0001" (a trailing separator + token), or "" when there is none.
std::string_view drop_token(std::string_view stem) {
  for (size_t k = stem.size(); k-- > 1;)
    if (is_sep(stem[k])) return is_token(stem.substr(k + 1)) ? stem.substr(0, k) : std::string_view();
  return {};
}
std::string_view parent_view(std::string_view p) {
  size_t s = p.rfind('/');
  return s == std::string_view::npos ? std::string_view() : p.substr(0, s);
}
std::string_view stem_view(std::string_view p) {  // drop_ext without a copy
  size_t slash = p.rfind('/');
  size_t dot = p.rfind('.');
  if (dot == std::string_view::npos || (slash != std::string_view::npos && dot < slash) ||
      dot == (slash == std::string_view::npos ? 0 : slash + 1))
    return p;
  return p.substr(0, dot);
}

}  // namespace

bool looks_like_mask(const FileRecord& r) {
  if (r.kind != FileKind::image || !r.features.has_lookalike) return false;
  const auto& st = r.features.stats;
  if (st.distinct > 32) return false;
  bool single = r.probe.mode == ColorMode::gray || r.probe.mode == ColorMode::graya ||
                r.probe.mode == ColorMode::palette || st.channels_equal;
  return single || st.distinct <= 8;
}

bool looks_like_photo(const FileRecord& r) {
  return r.kind == FileKind::image && r.features.has_lookalike && r.features.stats.distinct > 64;
}

namespace {

bool contains(const std::vector<std::string>& v, const std::string& f) { return std::find(v.begin(), v.end(), f) != v.end(); }

// pair_masks' state and its phases: folder layouts (sibling and parallel
// folders), then suffix pairs inside one folder, then the lists sorted.
class MaskPairer {
 public:
  MaskPairer(std::vector<FileRecord>& records, const MaskSettings& settings)
      : records_(records), settings_(settings), taken_(records.size(), false) {
    out_.mask_of.assign(records.size(), -1);
    out_.image_of.assign(records.size(), -1);
  }
  MaskPairing run() {
    folder_layouts();
    suffix_pairs();
    finish();
    return std::move(out_);
  }

 private:
  std::vector<FileRecord>& records_;
  const MaskSettings& settings_;
  MaskPairing out_;
  std::vector<bool> taken_;  // already a mask

  // Every folder that directly or indirectly holds an image, by parent.
  std::map<std::string, std::vector<std::string>> folder_children() const {
    std::set<std::string> folders;
    std::string_view last_folder;  // records_ are in path order: a folder's files come together
    for (const auto& r : records_) {
      if (r.kind != FileKind::image) continue;
      const size_t slash = r.path.rfind('/');
      const std::string_view folder = slash == std::string::npos ? std::string_view() : std::string_view(r.path).substr(0, slash);
      if (folder.empty() || folder == last_folder) continue;
      last_folder = folder;
      for (std::string f(folder); !f.empty(); f = parent_of(f)) folders.insert(f);
    }
    std::map<std::string, std::vector<std::string>> children;  // parent -> sub-folders, sorted
    for (const auto& f : folders) children[parent_of(f)].push_back(f);
    return children;
  }

  // Records below a folder: a contiguous, sorted range.
  std::pair<size_t, size_t> range_of(const std::string& folder) const {
    std::string prefix = folder + "/";
    auto lo = std::lower_bound(records_.begin(), records_.end(), prefix,
                               [](const FileRecord& r, const std::string& p) { return r.path < p; });
    auto hi = lo;
    while (hi != records_.end() && hi->path.compare(0, prefix.size(), prefix) == 0) ++hi;
    return std::make_pair(static_cast<size_t>(lo - records_.begin()), static_cast<size_t>(hi - records_.begin()));
  }

  // One candidate mask folder beside one photo folder: pairs by stem, decided by
  // the settings_ or the pixels; an accepted folder's files become masks.
  void decide_folder(const std::string& mask_dir, const std::string& photo_dir, const std::string& layout) {
    auto [ml, mh] = range_of(mask_dir);
    auto [pl, ph] = range_of(photo_dir);
    std::map<std::string, uint32_t> photos;  // relative stem -> record
    for (size_t i = pl; i < ph; ++i)
      if (records_[i].kind == FileKind::image && !taken_[i])
        photos.emplace(drop_ext(records_[i].path.substr(photo_dir.size() + 1)), static_cast<uint32_t>(i));
    MaskEvidence ev;
    ev.folder = mask_dir;
    ev.partner = photo_dir;
    ev.layout = layout;
    std::vector<std::pair<uint32_t, uint32_t>> pairs;  // (mask, photo)
    for (size_t i = ml; i < mh; ++i) {
      if (records_[i].kind != FileKind::image) continue;
      std::string stem = drop_ext(records_[i].path.substr(mask_dir.size() + 1));
      auto it = photos.find(stem);
      if (it == photos.end()) {
        std::string cut(drop_token(stem));
        if (!cut.empty()) it = photos.find(cut);
      }
      if (it == photos.end()) continue;
      ++ev.pairs;
      if (looks_like_mask(records_[i]) && looks_like_photo(records_[it->second])) ++ev.confirmed;
      pairs.emplace_back(static_cast<uint32_t>(i), it->second);
    }
    if (ev.pairs == 0) return;
    const bool forced = contains(settings_.force, mask_dir);
    if (contains(settings_.forbid, mask_dir)) {
      ev.decided_by = "forbidden";
    } else if (forced) {
      ev.accepted = true;
      ev.decided_by = "forced";
    } else {
      ev.accepted = ev.confirmed * 2 > ev.pairs;
      ev.decided_by = "pixels";
    }
    if (ev.accepted) {
      std::set<uint32_t> paired_photos;
      for (auto [m, p] : pairs) {
        if (!forced && looks_like_photo(records_[m])) {
          out_.misfiled.push_back(m);  // a photograph inside the mask folder stays an image
          continue;
        }
        records_[m].kind = FileKind::mask;
        taken_[m] = true;
        out_.image_of[m] = p;
        if (out_.mask_of[p] < 0) out_.mask_of[p] = m;  // a second mask of one image links back only
        paired_photos.insert(p);
      }
      for (size_t i = ml; i < mh; ++i)  // unpaired mask-like files in the folder are orphan masks
        if (records_[i].kind == FileKind::image && !taken_[i] && (forced || looks_like_mask(records_[i])) &&
            out_.image_of[i] < 0 && std::none_of(pairs.begin(), pairs.end(), [&](auto pr) { return pr.first == i; })) {
          records_[i].kind = FileKind::mask;
          taken_[i] = true;
        }
      for (const auto& [stem, p] : photos) {
        if (paired_photos.count(p) || out_.mask_of[p] >= 0) continue;
        if (looks_like_mask(records_[p])) out_.misfiled.push_back(p);  // a mask among the photographs
        else out_.orphan_images.push_back(p);
      }
      if (parent_of(mask_dir).empty() && layout == "parallel") out_.layout_roots.push_back(photo_dir);
    }
    out_.evidence.push_back(std::move(ev));
  }

  // Folder layouts: siblings that differ by a token, and mask-word folders beside others.
  void folder_layouts() {
    const auto children = folder_children();
    for (const auto& [parent, subs] : children) {
      for (const auto& b : subs) {
        const std::string bn = name_of(b);
        for (const auto& a : subs) {
          if (a == b) continue;
          const std::string an = name_of(a);
          if (differs_by_token(an, bn) && !differs_by_token(bn, an)) {
            decide_folder(b, a, "sibling");
          } else if (mask_words().count(lower(bn)) && !mask_words().count(lower(an))) {
            decide_folder(b, a, "parallel");
          }
        }
      }
      (void)parent;
    }
  }

  // Suffix pairs inside one folder: "X.ext" and "X<sep><token>.ext".
  void suffix_pairs() {
    std::map<std::pair<std::string, std::string>, std::vector<std::pair<uint32_t, uint32_t>>> groups;  // (folder, token)
    // First the images whose name ends in a separator and a token with a letter
    // (most sets have none: then no table of stems is made).
    std::vector<std::pair<uint32_t, size_t>> candidates;  // (record, length of the stem without the token)
    for (uint32_t i = 0; i < records_.size(); ++i) {
      if (records_[i].kind != FileKind::image) continue;
      const std::string_view stem = stem_view(records_[i].path);
      const std::string_view cut = drop_token(stem);
      if (cut.empty() || parent_view(cut) != parent_view(stem)) continue;
      if (!has_letter(stem.substr(cut.size() + 1))) continue;
      candidates.emplace_back(i, cut.size());
    }
    std::map<std::string, uint32_t> by_stem;
    if (!candidates.empty())
      for (uint32_t i = 0; i < records_.size(); ++i)
        if (records_[i].kind == FileKind::image) by_stem.emplace(drop_ext(records_[i].path), i);
    for (auto [i, cut_size] : candidates) {
      const std::string stem = drop_ext(records_[i].path);
      const std::string cut = stem.substr(0, cut_size), token = stem.substr(cut_size + 1);
      auto it = by_stem.find(cut);
      if (it == by_stem.end() || it->second == i) continue;
      groups[{parent_of(stem), lower(token)}].emplace_back(i, it->second);
    }
    for (auto& [key, pairs] : groups) {
      MaskEvidence ev;
      ev.folder = (key.first.empty() ? "" : key.first + "/") + "*" + key.second;
      ev.partner = key.first;
      ev.layout = "suffix";
      ev.pairs = pairs.size();
      for (auto [m, p] : pairs) ev.confirmed += looks_like_mask(records_[m]) && looks_like_photo(records_[p]);
      ev.accepted = !contains(settings_.forbid, key.first) && ev.confirmed * 2 > ev.pairs;
      ev.decided_by = contains(settings_.forbid, key.first) ? "forbidden" : "pixels";
      if (ev.accepted)
        for (auto [m, p] : pairs) {
          if (taken_[m] || out_.mask_of[p] >= 0 || !looks_like_mask(records_[m])) continue;
          records_[m].kind = FileKind::mask;
          taken_[m] = true;
          out_.mask_of[p] = m;
          out_.image_of[m] = p;
        }
      out_.evidence.push_back(std::move(ev));
    }
  }

  void finish() {
    std::sort(out_.misfiled.begin(), out_.misfiled.end());
    out_.misfiled.erase(std::unique(out_.misfiled.begin(), out_.misfiled.end()), out_.misfiled.end());
    std::sort(out_.orphan_images.begin(), out_.orphan_images.end());
    out_.orphan_images.erase(std::unique(out_.orphan_images.begin(), out_.orphan_images.end()), out_.orphan_images.end());
    std::sort(out_.layout_roots.begin(), out_.layout_roots.end());
    out_.layout_roots.erase(std::unique(out_.layout_roots.begin(), out_.layout_roots.end()), out_.layout_roots.end());
  }
};

}  // namespace

MaskPairing pair_masks(std::vector<FileRecord>& records, const MaskSettings& settings) {
  return MaskPairer(records, settings).run();
}

void check_masks(const std::vector<FileRecord>& records, const MaskPairing& m, std::vector<Finding>& out) {
  std::vector<std::string> orphans, mismatch, empty, misfiled;
  for (size_t i = 0; i < records.size(); ++i) {
    if (records[i].kind != FileKind::mask) continue;
    if (m.image_of[i] < 0) orphans.push_back(records[i].path);
    if (records[i].features.stats.distinct <= 1) empty.push_back(records[i].path);
    if (m.image_of[i] >= 0) {
      const auto& img = records[static_cast<size_t>(m.image_of[i])].probe;
      if (img.width != records[i].probe.width || img.height != records[i].probe.height) {
        mismatch.push_back(records[i].path);
        mismatch.push_back(records[static_cast<size_t>(m.image_of[i])].path);
      }
    }
  }
  for (uint32_t i : m.orphan_images) orphans.push_back(records[i].path);
  for (uint32_t i : m.misfiled) misfiled.push_back(records[i].path);
  // `units` of the paths (2 for pairs) make the count; the message takes the
  // singular or the plural.
  auto add = [&](const char* code, std::vector<std::string> paths, size_t units, const char* one, const char* many) {
    if (paths.empty()) return;
    Finding f = make_finding(code);
    const size_t n = paths.size() / units;
    f.message = std::to_string(n) + " " + (n == 1 ? one : many);
    f.details = {{"count", paths.size()}};
    f.paths = std::move(paths);
    out.push_back(std::move(f));
  };
  add("mask-orphan", orphans, 1, "file without a partner: a mask with no image, or an image in a paired folder with no mask",
      "files without a partner: masks with no image, or images in a paired folder with no mask");
  add("mask-size-mismatch", mismatch, 2, "mask/image pair whose sizes differ (the mask is listed before its image)",
      "mask/image pairs whose sizes differ (each mask is listed before its image)");
  add("mask-empty", empty, 1, "mask with a single value: no foreground (or nothing but foreground)",
      "masks with a single value: no foreground (or nothing but foreground)");
  add("mask-misfiled", misfiled, 1, "file filed on the wrong side: a photograph in a mask folder, or a mask among the photographs",
      "files filed on the wrong side: photographs in a mask folder, or masks among the photographs");
}

}  // namespace tamis
