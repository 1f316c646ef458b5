// The baseline: an earlier report.json (and the manifest.csv beside it) to compare
// a run with, so a team can adopt the gate on a data set with known problems.
//
// A finding is identified by its code and each path it names ("code\tpath");
// a finding without paths by its code and message. A finding is "known" when every
// one of its identities is in the baseline; otherwise it is new.
#pragma once

#include <filesystem>
#include <set>
#include <string>
#include <vector>

#include "tamis/model/findings.h"

namespace tamis {

struct Baseline {
  std::set<std::string> identities;  // of the baseline's findings
  std::set<std::string> files;       // paths of the baseline's manifest
  bool has_files = false;            // a manifest.csv was found beside the report
  size_t findings = 0;
};

struct BaselineDiff {
  bool present = false;
  std::vector<std::string> files_added, files_removed;
  size_t findings_new = 0, findings_known = 0, findings_gone = 0;
};

// Identities of one finding (see above).
std::vector<std::string> finding_identities(const Finding& f);

// Reads OLD/report.json and, when present, OLD/manifest.csv. Throws
// std::runtime_error when the report cannot be read or is not a tamis report.
Baseline load_baseline(const std::filesystem::path& report_json);

// The report.json schema_version a baseline must carry (report_json.h's
// kReportSchemaVersion, which a test holds equal): a report of another version
// is refused, not read as if its fields meant the same.
inline constexpr int kBaselineReportSchema = 1;

}  // namespace tamis
