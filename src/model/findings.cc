#include "tamis/model/findings.h"

#include <algorithm>
#include <stdexcept>
#include <tuple>

namespace tamis {

std::string_view to_string(Severity s) {
  switch (s) {
    case Severity::info: return "info";
    case Severity::warning: return "warning";
    case Severity::error: return "error";
  }
  return "info";
}

const std::vector<FindingKind>& finding_catalogue() {
  using S = Severity;
  static const std::vector<FindingKind> c = [] {
    std::vector<FindingKind> v{
        // inventory: files that cannot be used, and what the walk left alone
        {"unreadable", S::error, "unreadable files", "docs/findings.md"},
        {"too-many-unreadable", S::error, "too many unreadable files", "docs/findings.md"},
        {"undecodable-variant", S::warning, "files this build cannot decode", "docs/findings.md"},
        {"over-memory-budget", S::warning, "images over the memory budget", "docs/findings.md"},
        {"no-label", S::warning, "images outside any class folder", "docs/findings.md"},
        {"link-not-followed", S::info, "symbolic links not followed", "docs/findings.md"},
        {"special-file", S::info, "FIFOs, sockets and devices", "docs/findings.md"},
        {"folder-unreadable", S::warning, "folders that could not be listed", "docs/findings.md"},
        {"stray-file", S::info, "files that are not images", "docs/findings.md"},
        // copies and look-alikes
        {"byte-identical", S::warning, "byte-identical files", "docs/findings.md"},
        {"look-alike", S::warning, "look-alike images", "docs/findings.md"},
        {"label-conflict", S::error, "copies under different classes", "docs/findings.md"},
        {"split-leak", S::error, "copies across splits", "docs/findings.md"},
        {"lookalike-chain", S::warning, "groups joined through a chain", "docs/findings.md"},
        // the split
        {"split-without-class", S::warning, "a split without a class", "docs/findings.md"},
        {"class-capped", S::info, "classes capped by --per-class", "docs/findings.md"},
        // images
        {"tiny-image", S::warning, "tiny images", "docs/findings.md"},
        {"below-input-size", S::info, "images below the input size", "docs/findings.md"},
        {"aspect-outlier", S::info, "unusual aspect ratios", "docs/findings.md"},
        {"near-uniform", S::warning, "nearly uniform images", "docs/findings.md"},
        {"underexposed", S::warning, "underexposed images", "docs/findings.md"},
        {"overexposed", S::warning, "overexposed images", "docs/findings.md"},
        {"low-entropy", S::info, "images with little tonal variety", "docs/findings.md"},
        {"unsharp", S::warning, "unsharp images", "docs/findings.md"},
        {"gray-as-rgb", S::info, "gray pictures stored as colour", "docs/findings.md"},
        {"alpha-unused", S::info, "alpha channels that are all opaque", "docs/findings.md"},
        {"transparency", S::info, "images with transparency", "docs/findings.md"},
        {"deep-bit-depth", S::info, "more than 8 bits a sample", "docs/findings.md"},
        {"palette-image", S::info, "palette images", "docs/findings.md"},
        {"cmyk-image", S::warning, "CMYK images", "docs/findings.md"},
        {"multi-frame", S::info, "files with several frames", "docs/findings.md"},
        {"extension-mismatch", S::warning, "extensions that name another format", "docs/findings.md"},
        {"exif-rotated", S::warning, "images rotated by EXIF", "docs/findings.md"},
        {"gps-location", S::warning, "GPS locations in files", "docs/findings.md"},
        // classes
        {"label-variants", S::warning, "one class spelled two ways", "docs/findings.md"},
        {"label-near", S::info, "class names close to each other", "docs/findings.md"},
        {"small-class", S::warning, "small classes", "docs/findings.md"},
        {"empty-class", S::warning, "empty classes", "docs/findings.md"},
        {"class-imbalance", S::warning, "unbalanced classes", "docs/findings.md"},
        // masks
        {"mask-orphan", S::warning, "masks without images, images without masks", "docs/masks.md"},
        {"mask-size-mismatch", S::error, "masks of another size than their image", "docs/masks.md"},
        {"mask-empty", S::warning, "empty masks", "docs/masks.md"},
        {"mask-misfiled", S::warning, "masks filed as images", "docs/masks.md"},
    };
    std::sort(v.begin(), v.end(), [](const FindingKind& a, const FindingKind& b) { return a.code < b.code; });
    return v;
  }();
  return c;
}

const FindingKind* finding_kind(std::string_view code) {
  const auto& c = finding_catalogue();
  auto it = std::lower_bound(c.begin(), c.end(), code, [](const FindingKind& k, std::string_view x) { return k.code < x; });
  return it != c.end() && it->code == code ? &*it : nullptr;
}

Finding make_finding(std::string_view code) {
  const FindingKind* k = finding_kind(code);
  if (!k) throw std::logic_error("finding code not in the catalogue: " + std::string(code));
  Finding f;
  f.code = std::string(code);
  f.severity = k->severity;
  return f;
}

void sort_findings(std::vector<Finding>& findings) {
  for (auto& f : findings) std::sort(f.paths.begin(), f.paths.end());
  std::stable_sort(findings.begin(), findings.end(), [](const Finding& a, const Finding& b) {
    static const std::string empty;
    const std::string& pa = a.paths.empty() ? empty : a.paths.front();
    const std::string& pb = b.paths.empty() ? empty : b.paths.front();
    return std::tie(b.severity, a.code, pa) < std::tie(a.severity, b.code, pb);
  });
}

}  // namespace tamis
