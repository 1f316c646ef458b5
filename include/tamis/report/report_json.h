// report.json: the machine-readable report (schema: docs/report.schema.json).
//
// Holds schema_version, tool, settings (everything that decides the outputs),
// totals, classes with per-split counts, groups, findings, and the lists of
// ignored files and unreadable files with their reasons. Rendering only: every
// number comes from the AuditResult. Strings that are not valid UTF-8 (raw file
// name bytes) are written with U+FFFD in place of the bad bytes.
#pragma once

#include <nlohmann/json.hpp>

#include "tamis/pipeline/audit.h"

namespace tamis {

inline constexpr int kReportSchemaVersion = 1;

// The settings as they are recorded in report.json (and compared on re-split).
nlohmann::json settings_json(const TreeSettings& settings, const PlaceSettings& placed);

nlohmann::json build_report(const AuditResult& result);

// Serialises with 2-space indent; invalid UTF-8 replaced, never thrown on.
std::string dump_json(const nlohmann::json& j);

// The same report without the findings' path lists (a finding may name every
// file of the set: 70,000 JSON strings for Fashion-MNIST's tiny images), and the
// writer that adds them from the findings themselves: write_report_json(out,
// build_report_without_paths(r), r.findings) appends exactly
// dump_json(build_report(r)) + "\n" (tests compare them), without a JSON value
// for each path.
nlohmann::json build_report_without_paths(const AuditResult& result);
void write_report_json(std::string& out, const nlohmann::json& report_without_paths,
                       const std::vector<Finding>& findings);

}  // namespace tamis
