// Image and label checks (checks.h): quality, storage, orientation, privacy, labels.
#include <algorithm>
#include <cctype>
#include <cmath>
#include <map>

#include "tamis/place/checks.h"
#include "tamis/read/probe.h"

namespace tamis {

namespace {

// Paths by finding code, and the measurements of the first few files of each
// (built only for those: `measure` is called while a code has under 50).
struct Collector {
  std::map<std::string, std::vector<std::string>, std::less<>> paths;  // code -> paths
  std::map<std::string, nlohmann::json, std::less<>> examples;         // code -> measurements
  uint64_t images = 0;                                                  // images seen
  std::pair<uint32_t, uint32_t> size{};                                 // the first one's width and height
  bool one_size = true;                                                 // and every other's
  template <typename Map>
  static typename Map::mapped_type& slot(Map& m, std::string_view code) {
    auto it = m.find(code);
    if (it == m.end()) it = m.emplace(std::string(code), typename Map::mapped_type{}).first;
    return it->second;
  }
  void add(std::string_view code, const FileRecord& r) { slot(paths, code).push_back(r.path); }
  template <typename Measure>
  void add(std::string_view code, const FileRecord& r, const Measure& measure) {
    add(code, r);
    auto& e = slot(examples, code);
    if (e.is_null()) e = nlohmann::json::array();
    if (e.size() < 50) e.push_back({{"path", r.path}, {"measure", measure()}});
  }
};

struct Robust {
  double median = 0, scale = 0;  // scale = 1.4826 * MAD (a consistent estimate of sigma)
  bool usable = false;
  double z(double x) const { return usable && scale > 0 ? (x - median) / scale : 0.0; }
};

Robust robust(std::vector<double> v) {
  Robust r;
  if (v.size() < 8) return r;
  auto mid = v.begin() + static_cast<long>(v.size() / 2);
  std::nth_element(v.begin(), mid, v.end());
  r.median = *mid;
  for (auto& x : v) x = std::abs(x - r.median);
  std::nth_element(v.begin(), mid, v.end());
  r.scale = 1.4826 * *mid;
  r.usable = true;
  return r;
}

double round2(double x) { return std::round(x * 100) / 100; }

}  // namespace

namespace {

// The robust distributions the image checks compare with: per class (index c)
// and for the whole set (index nc), of mean luminance, entropy and log focus,
// and the set's log aspect ratios. A class too small for its own falls back on
// the set's (pick).
struct Pools {
  size_t nc = 0;
  std::vector<Robust> mean, entropy, focus;
  Robust aspect;
  const Robust& pick(const std::vector<Robust>& z, size_t c) const { return z[c].usable ? z[c] : z[nc]; }
};

Pools image_pools(const std::vector<FileRecord>& records, const Labelling& labels) {
  // Per-class (or, for classes under 8 images, whole-set) distributions.
  const size_t nc = labels.names.size();
  std::vector<std::vector<double>> mean_c(nc + 1), ent_c(nc + 1), focus_c(nc + 1);
  std::vector<double> log_aspect;
  auto class_of = [&](size_t i) { return labels.label_of[i] >= 0 ? static_cast<size_t>(labels.label_of[i]) : nc; };
  {  // exact sizes first: growing vectors would hold up to twice the memory
    std::vector<size_t> n_c(nc + 1, 0);
    for (size_t i = 0; i < records.size(); ++i)
      if (records[i].kind == FileKind::image && records[i].features.has_lookalike) {
        if (class_of(i) != nc) ++n_c[class_of(i)];
        ++n_c[nc];
      }
    for (size_t k = 0; k <= nc; ++k) {
      mean_c[k].reserve(n_c[k]);
      ent_c[k].reserve(n_c[k]);
      focus_c[k].reserve(n_c[k]);
    }
    log_aspect.reserve(n_c[nc]);
  }
  for (size_t i = 0; i < records.size(); ++i) {
    const auto& r = records[i];
    if (r.kind != FileKind::image || !r.features.has_lookalike) continue;
    const size_t c = class_of(i);
    for (size_t k : {c, nc}) {  // its class, then the whole set's pool (index nc)
      mean_c[k].push_back(r.features.stats.luma_mean);
      ent_c[k].push_back(r.features.stats.entropy);
      focus_c[k].push_back(std::log1p(r.features.stats.focus));
      if (c == nc) break;  // an image without a class goes into the pool once
    }
    log_aspect.push_back(std::log(double(r.probe.width) / r.probe.height));
  }
  // The whole set's pool is index nc; it was filled with every image above.
  std::vector<Robust> zm(nc + 1), ze(nc + 1), zf(nc + 1);
  for (size_t k = 0; k <= nc; ++k) {  // each pool is used once: handed over, not copied
    zm[k] = robust(std::move(mean_c[k]));
    ze[k] = robust(std::move(ent_c[k]));
    zf[k] = robust(std::move(focus_c[k]));
  }
  Pools pools;
  pools.nc = nc;
  pools.mean = std::move(zm);
  pools.entropy = std::move(ze);
  pools.focus = std::move(zf);
  pools.aspect = robust(std::move(log_aspect));
  return pools;

}

}  // namespace

unsigned quality_floors_met(const FileRecord& r) {
  if (r.kind != FileKind::image || !r.features.has_lookalike) return 0;
  const ImageStats& st = r.features.stats;
  if (st.luma_std < kFlatContrast) return 1u;  // a flat frame is judged by that rule alone
  return (st.luma_mean < kDarkMean ? 2u : 0u) | (st.luma_mean > kBrightMean ? 4u : 0u) |
         (st.entropy < kLowEntropy ? 8u : 0u) | (st.focus < kUnsharpFocus ? 16u : 0u);
}

namespace {

// Each image against the thresholds and its class's distributions: the codes
// it raises, with their measurements, into `col`; images below the input side
// counted in `upscaled`.
void collect_image_flags(const std::vector<FileRecord>& records, const Labelling& labels, const CheckSettings& cs,
                         const Pools& pools, Collector& col, uint64_t& upscaled) {
  for (size_t i = 0; i < records.size(); ++i) {
    const auto& r = records[i];
    if (r.kind != FileKind::image) continue;
    const auto& p = r.probe;
    if (col.images++ == 0) col.size = {p.width, p.height};
    else if (col.size != std::pair{p.width, p.height}) col.one_size = false;
    const auto& st = r.features.stats;
    const size_t c = labels.label_of[i] >= 0 ? static_cast<size_t>(labels.label_of[i]) : pools.nc;
    const uint32_t shorter = std::min(p.width, p.height);
    if (shorter < cs.min_side) col.add("tiny-image", r, [&] { return nlohmann::json{{"width", p.width}, {"height", p.height}}; });
    if (shorter < cs.input_side) {
      ++upscaled;
      col.add("below-input-size", r);
    }
    if (pools.aspect.usable) {
      double la = std::log(double(p.width) / p.height);
      if (std::abs(la - pools.aspect.median) > std::log(2.0))
        col.add("aspect-outlier", r, [&] {
          return nlohmann::json{{"aspect", round2(double(p.width) / p.height)}, {"set_median", round2(std::exp(pools.aspect.median))}};
        });
    }
    if (r.features.has_lookalike) {
      auto m = [&] {
        return nlohmann::json{{"mean", round2(st.luma_mean)}, {"std", round2(st.luma_std)},
                              {"entropy", round2(st.entropy)}, {"focus", round2(st.focus)}};
      };
      if (st.luma_std < kFlatContrast) {
        col.add("near-uniform", r, m);
      } else {
        double z = pools.pick(pools.mean, c).z(st.luma_mean);
        if (st.luma_mean < kDarkMean && z < -cs.outlier_z) col.add("underexposed", r, m);
        if (st.luma_mean > kBrightMean && z > cs.outlier_z) col.add("overexposed", r, m);
        if (st.entropy < kLowEntropy && pools.pick(pools.entropy, c).z(st.entropy) < -cs.outlier_z) col.add("low-entropy", r, m);
        if (st.focus < kUnsharpFocus && pools.pick(pools.focus, c).z(std::log1p(st.focus)) < -cs.outlier_z)
          col.add("unsharp", r, m);
      }
      bool colour = p.mode == ColorMode::rgb || p.mode == ColorMode::rgba || p.mode == ColorMode::cmyk;
      if (colour && st.channels_equal) col.add("gray-as-rgb", r);
      bool alpha = p.mode == ColorMode::rgba || p.mode == ColorMode::graya;
      if (alpha && st.alpha_min == 255) col.add("alpha-unused", r);
      if (st.alpha_min < 255) col.add("transparency", r, [&] { return nlohmann::json{{"alpha_min", st.alpha_min}}; });
    }
    if (p.bit_depth > 8) col.add("deep-bit-depth", r, [&] { return nlohmann::json{{"bit_depth", p.bit_depth}}; });
    if (p.mode == ColorMode::palette) col.add("palette-image", r);
    if (p.mode == ColorMode::cmyk) col.add("cmyk-image", r);
    if (p.frames > 1) col.add("multi-frame", r, [&] { return nlohmann::json{{"frames", p.frames}}; });
    Format by_name = format_from_extension(r.path);
    if (by_name != p.format)
      col.add("extension-mismatch", r, [&] {
        return nlohmann::json{{"bytes", to_string(p.format)}, {"extension", to_string(by_name)}};
      });
    if (p.orientation >= 2) {
      bool swaps = p.orientation >= 5;
      col.add("exif-rotated", r, [&] {
        return nlohmann::json{{"orientation", p.orientation}, {"stored", {p.width, p.height}},
                              {"displayed", {swaps ? p.height : p.width, swaps ? p.width : p.height}}};
      });
    }
    if (p.has_gps) col.add("gps-location", r);
  }
}

// One finding a code raised, in the rules' order, with its measurements.
void emit_image_findings(Collector& col, uint64_t upscaled, const CheckSettings& cs, std::vector<Finding>& out) {
  struct Rule {
    const char* code;  // its default severity is the catalogue's (findings.h)
    const char* what;
  };
  static const Rule rules[] = {
      {"tiny-image", ""},        // the message names the threshold (below)
      {"below-input-size", ""},  // the same
      {"aspect-outlier", "an aspect ratio more than twice or under half the set's median"},
      {"near-uniform", "nearly uniform frames (luminance spread under 3 grey levels)"},
      {"underexposed", "very dark (mean luminance under 30, unusual for the class)"},
      {"overexposed", "very bright (mean luminance over 225, unusual for the class)"},
      {"low-entropy", "a narrow tonal range (histogram entropy under 3 bits, unusual for the class)"},
      {"unsharp", "little fine detail, probably blurred (low Laplacian variance, unusual for the class)"},
      {"gray-as-rgb", "grayscale pictures stored as colour (all channels equal)"},
      {"alpha-unused", "an alpha channel that is fully opaque everywhere"},
      {"transparency", "transparent pixels: loaders that drop alpha show what lies under them"},
      {"deep-bit-depth", "more than 8 bits per sample: many loaders cut or mis-scale them"},
      {"palette-image", "palette (indexed-colour) images"},
      {"cmyk-image", "CMYK images: many loaders convert them wrongly or refuse them"},
      {"multi-frame", "several frames or pages: only the first is used"},
      {"extension-mismatch", "the file name's extension names another format than the bytes"},
      {"exif-rotated", "an EXIF orientation other than upright: loaders that ignore it see the picture turned or mirrored"},
      {"gps-location", "EXIF GPS position tags: the files reveal where they were taken (see README on personal data)"},
  };
  for (const auto& rule : rules) {
    auto it = col.paths.find(rule.code);
    if (it == col.paths.end()) continue;
    Finding f = make_finding(rule.code);
    std::string what = rule.what;
    if (f.code == "tiny-image") what = "the shorter side is under " + std::to_string(cs.min_side) + " px";
    if (f.code == "below-input-size")
      what = "the shorter side is under the model input side, " + std::to_string(cs.input_side) + " px: it will be upscaled";
    f.message = std::to_string(it->second.size()) + (it->second.size() == 1 ? " image: " : " images: ") + what;
    f.details = {{"count", it->second.size()}};
    // A size rule that every image of the set meets is a fact about the set (a
    // collection of 28x28 pictures): said once, with the size when there is one,
    // and naming no file (every row would carry it; the manifest has the sizes).
    const bool size_rule = f.code == "tiny-image" || f.code == "below-input-size";
    const bool whole_set = size_rule && col.images >= 2 && it->second.size() == col.images;
    if (whole_set) {
      const std::string size =
          col.one_size ? " (" + std::to_string(col.size.first) + "x" + std::to_string(col.size.second) + ")" : "";
      // No count in the message: a baseline knows a finding that names no file
      // by its message, and adding an image of that size changes no fact.
      f.message = "all images" + size + ": " + what;
      f.details["all_images"] = true;
      it->second.clear();
    }
    if (f.code == "tiny-image") f.details["min_side"] = cs.min_side;
    if (f.code == "below-input-size") {
      f.details["input_side"] = cs.input_side;
      f.details["upscaled"] = upscaled;
    }
    auto ex = col.examples.find(rule.code);
    if (ex != col.examples.end() && !whole_set) f.details["measurements"] = ex->second;
    f.paths = std::move(it->second);
    out.push_back(std::move(f));
  }
}

}  // namespace

void check_images(const std::vector<FileRecord>& records, const Labelling& labels, const CheckSettings& cs,
                  std::vector<Finding>& out) {
  const Pools pools = image_pools(records, labels);
  Collector col;
  uint64_t upscaled = 0;
  collect_image_flags(records, labels, cs, pools, col, upscaled);
  emit_image_findings(col, upscaled, cs, out);
}

size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (size_t j = 1; j <= b.size(); ++j)
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1)});
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

std::string label_key(std::string_view name) {
  std::string k;
  for (unsigned char c : name) {
    if (c == ' ' || c == '_' || c == '-' || c == '.') continue;
    k.push_back(static_cast<char>(std::tolower(c)));
  }
  if (k.size() >= 4 && k.back() == 's') k.pop_back();
  return k;
}

Balance class_balance(const std::vector<FileRecord>& records, const Labelling& labels) {
  std::vector<uint64_t> counts(labels.names.size(), 0);
  for (size_t i = 0; i < records.size(); ++i)
    if (records[i].kind == FileKind::image && labels.label_of[i] >= 0) ++counts[static_cast<size_t>(labels.label_of[i])];
  Balance b;
  uint64_t total = 0;
  std::vector<uint64_t> nonzero;
  for (uint64_t c : counts)
    if (c > 0) nonzero.push_back(c);
  if (nonzero.empty()) return b;
  b.largest = *std::max_element(nonzero.begin(), nonzero.end());
  b.smallest = *std::min_element(nonzero.begin(), nonzero.end());
  for (uint64_t c : nonzero) total += c;
  b.imbalance_ratio = double(b.largest) / double(b.smallest);
  double h = 0;
  for (uint64_t c : nonzero) {
    double p = double(c) / double(total);
    h -= p * std::log(p);
  }
  b.normalized_entropy = nonzero.size() > 1 ? h / std::log(double(nonzero.size())) : 1.0;
  return b;
}

void check_labels(const std::vector<FileRecord>& records, const Labelling& labels, const WalkResult& walk,
                  const CheckSettings& cs, std::vector<Finding>& out) {
  const auto& names = labels.names;
  std::vector<uint64_t> counts(names.size(), 0);
  // Each class's images as record indices (4 bytes each; the paths are copied
  // only for classes that get a finding).
  std::vector<std::vector<uint32_t>> members_of(names.size());
  for (size_t i = 0; i < records.size(); ++i)
    if (records[i].kind == FileKind::image && labels.label_of[i] >= 0) {
      ++counts[static_cast<size_t>(labels.label_of[i])];
      members_of[static_cast<size_t>(labels.label_of[i])].push_back(static_cast<uint32_t>(i));
    }
  auto class_paths = [&](size_t k, std::vector<std::string>& to) {
    for (uint32_t i : members_of[k]) to.push_back(records[i].path);
  };
  // Spellings of one class.
  std::map<std::string, std::vector<size_t>> by_key;
  for (size_t k = 0; k < names.size(); ++k) by_key[label_key(names[k])].push_back(k);
  for (const auto& [key, members] : by_key) {
    if (members.size() < 2) continue;
    Finding f = make_finding("label-variants");
    std::vector<std::string> list;
    for (size_t k : members) list.push_back(names[k]);
    std::string joined;
    for (const auto& n : list) joined += (joined.empty() ? "" : ", ") + n;
    f.message = "class names that differ only in case, spaces, '_', '-' or a plural s: " + joined +
                " (probably one class spelled " + std::to_string(list.size()) + " ways)";
    f.details = {{"labels", list}, {"key", key}};
    for (size_t k : members) class_paths(k, f.paths);
    out.push_back(std::move(f));
  }
  // Names one edit apart (after that normalisation), when not already the same key.
  std::vector<std::string> keys;
  for (const auto& [key, members] : by_key) keys.push_back(key);
  for (size_t a = 0; a < keys.size(); ++a)
    for (size_t b = a + 1; b < keys.size(); ++b) {
      if (keys[a].size() < 4 || keys[b].size() < 4) continue;  // short names collide by chance
      size_t longer = std::max(keys[a].size(), keys[b].size());
      if (longer - std::min(keys[a].size(), keys[b].size()) > 1 || edit_distance(keys[a], keys[b]) != 1) continue;
      Finding f = make_finding("label-near");
      std::vector<std::string> list;
      for (size_t k : by_key[keys[a]]) list.push_back(names[k]);
      for (size_t k : by_key[keys[b]]) list.push_back(names[k]);
      f.message = "class names one letter apart: " + list.front() + " and " + list.back() + " (a typo, or two real classes?)";
      f.details = {{"labels", list}, {"distance", 1}};
      out.push_back(std::move(f));
    }
  for (size_t k = 0; k < names.size(); ++k)
    if (counts[k] < cs.min_class) {
      Finding f = make_finding("small-class");
      f.message = "class " + names[k] + " has " + std::to_string(counts[k]) + " images, fewer than " +
                  std::to_string(cs.min_class);
      f.details = {{"label", names[k]}, {"count", counts[k]}, {"min_class", cs.min_class}};
      class_paths(k, f.paths);
      out.push_back(std::move(f));
    }
  // Empty class folders: top-level folders (or second level in a pre-split tree) with no image below.
  std::vector<std::string> empty;
  for (const auto& d : walk.dirs) {
    size_t depth = static_cast<size_t>(std::count(d.begin(), d.end(), '/'));
    bool class_level = labels.pre_split ? depth == 1 : depth == 0;
    if (!class_level || split_from_folder(d) != SplitName::none) continue;
    std::string prefix = d + "/";
    auto it = std::lower_bound(records.begin(), records.end(), prefix,
                               [](const FileRecord& r, const std::string& p) { return r.path < p; });
    bool any = false;
    for (; it != records.end() && it->path.compare(0, prefix.size(), prefix) == 0; ++it)
      if (it->kind == FileKind::image || it->kind == FileKind::unreadable) {
        any = true;
        break;
      }
    if (!any) empty.push_back(d);
  }
  if (!empty.empty()) {
    Finding f = make_finding("empty-class");
    f.message = std::to_string(empty.size()) + (empty.size() == 1 ? " class folder holds" : " class folders hold") +
                " no image";
    f.details = {{"count", empty.size()}};
    f.paths = std::move(empty);
    out.push_back(std::move(f));
  }
  Balance b = class_balance(records, labels);
  if (b.smallest > 0 && b.imbalance_ratio > cs.max_imbalance) {
    Finding f = make_finding("class-imbalance");
    char ratio[32];
    std::snprintf(ratio, sizeof ratio, "%.1f", b.imbalance_ratio);
    f.message = std::string("the largest class has ") + ratio + " times the images of the smallest (limit " +
                std::to_string(static_cast<int>(cs.max_imbalance)) + ")";
    f.details = {{"imbalance_ratio", b.imbalance_ratio}, {"largest", b.largest}, {"smallest", b.smallest},
                 {"normalized_entropy", b.normalized_entropy}};
    out.push_back(std::move(f));
  }
  std::vector<std::string> stray;
  for (const auto& r : records)
    if (r.kind == FileKind::ignored) stray.push_back(r.path);
  if (!stray.empty()) {
    Finding f = make_finding("stray-file");
    f.message = std::to_string(stray.size()) + (stray.size() == 1 ? " file is not an image (or is hidden) and was left aside"
                                                                  : " files are not images (or are hidden) and were left aside");
    f.details = {{"count", stray.size()}};
    f.paths = std::move(stray);
    out.push_back(std::move(f));
  }
}

}  // namespace tamis
