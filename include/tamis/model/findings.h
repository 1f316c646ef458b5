// Findings: what the checks conclude, as data.
//
// A Finding has a stable code (kebab-case, the project's own vocabulary), a
// severity, the paths it concerns (sorted), a message a person understands,
// and the measurements behind it. Checks create findings (make_finding, from
// the one catalogue below); reports render them; nothing else prints them.
// The policy may change a finding's severity by code; breaks_policy is the one
// place that decides whether a finding fails a run.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

namespace tamis {

enum class Severity { info, warning, error };
std::string_view to_string(Severity s);

struct Finding {
  std::string code;
  Severity severity = Severity::warning;
  std::vector<std::string> paths;
  std::string message;
  nlohmann::json details = nlohmann::json::object();
};

// One entry of the finding catalogue: every code tamis raises, once. Checks
// take the default severity from here (make_finding), the policy accepts only
// these codes, JUnit has a test case per entry, and docs/findings.md (or the
// page named in `doc`) lists each code with the same default severity (tested).
struct FindingKind {
  std::string_view code;
  Severity severity;       // the default; a policy may change it
  std::string_view title;  // a few words for headings and the terminal summary
  std::string_view doc;    // the page that documents it
};
// Sorted by code.
const std::vector<FindingKind>& finding_catalogue();
// The entry of `code`, or nullptr when the catalogue has none.
const FindingKind* finding_kind(std::string_view code);
// A finding of a catalogued code at its default severity. A code missing from
// the catalogue is a programming error: std::logic_error.
Finding make_finding(std::string_view code);
// Whether a finding fails the run: an error, unless the policy fails only on
// new findings and the baseline knows this one, or the policy's accept list
// accepts it (policy.h AcceptEntry).
inline bool breaks_policy(Severity s, bool known, bool fail_on_new_only, bool accepted = false) {
  return s == Severity::error && !(fail_on_new_only && known) && !accepted;
}

// Sorts findings by (severity desc, code, first path) and each finding's paths
// bytewise, so reports list them the same way on every run.
void sort_findings(std::vector<Finding>& findings);

}  // namespace tamis
