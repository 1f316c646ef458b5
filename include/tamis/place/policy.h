// The policy: which findings break a run, and the thresholds the checks use.
//
// A policy file is JSON (docs/policy.md):
//   { "severity":   { "<finding code>": "error" | "warning" | "info" | "off", ... },
//     "thresholds": { "min_side": 32, "input_side": 224, "min_class": 10,
//                     "max_imbalance": 10, "outlier_z": 3.5, "max_unreadable_share": 1 },
//     "fail_on":    "all" | "new" }
// Every key is optional; unknown keys, unknown codes and values of the wrong type
// are errors (PolicyError names the key), so a typo never silently passes a build.
// "fail_on": "new" makes only findings absent from the --baseline report fail.
#pragma once

#include <filesystem>
#include <map>
#include <optional>
#include <stdexcept>
#include <string>

#include "tamis/model/findings.h"
#include "tamis/place/checks.h"
#include "tamis/place/class_map.h"
#include "tamis/relate/groups.h"

namespace tamis {

class PolicyError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

// An accepted finding (the policy's "accept" list): a finding of `code` that
// names only `paths` (every path it names is among them), or whose group is
// `group` (details.group, "g3"), is accepted for `reason`: it stays in every
// report, marked accepted, and no longer breaks the policy.
struct AcceptEntry {
  std::string code;
  std::vector<std::string> paths;  // sorted
  std::string group;
  std::string reason;
};

struct Policy {
  std::map<std::string, std::optional<Severity>> severity;  // nullopt: "off" (finding dropped)
  CheckSettings thresholds;
  double max_unreadable_share = 1.0;  // above this share of unreadable image files: too-many-unreadable (error)
  bool fail_on_new_only = false;
  std::vector<std::string> exclude_flagged;  // "exclude_flagged": codes whose images the split leaves out (leave_out.h)
  bool one_per_group = false;                // "one_per_group": one member of each look-alike group in the split
  ClassMap classes;                          // "class_aliases" {variant: class}, "exclude_classes" [names] (class_map.h)
  std::vector<AcceptEntry> accept;           // "accept": accepted findings
  GroupSettings lookalike;  // "lookalike": radius, screen_radius, min_correlation, max_local, max_chroma, max_chroma_local, fit_floor, small_side (groups.h, match.h)
};

// The documented default policy (docs/policy.md): the checks' own severities.
Policy default_policy();

// Reads and validates a policy file; throws PolicyError naming the bad key.
Policy load_policy(const std::filesystem::path& file);
Policy parse_policy(const std::string& text);

// Per finding, the index of the first accept entry that accepts it, or -1.
std::vector<int> match_accepts(const std::vector<AcceptEntry>& accept, const std::vector<Finding>& findings);

// Applies severities (dropping "off" codes) and adds `too-many-unreadable`.
void apply_policy(const Policy& policy, uint64_t unreadable, uint64_t image_files, std::vector<Finding>& findings);

}  // namespace tamis
