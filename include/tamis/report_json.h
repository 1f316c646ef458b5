// report.json: the machine-readable report (schema: docs/report.schema.json).
//
// Holds schema_version, tool, settings (everything that decides the outputs),
// totals, classes with per-split counts, groups, findings, and the lists of
// ignored files and unreadable files with their reasons. Rendering only: every
// number comes from the AuditResult. Strings that are not valid UTF-8 (raw file
// name bytes) are written with U+FFFD in place of the bad bytes.
#pragma once

#include <nlohmann/json.hpp>

#include "tamis/audit.h"

namespace tamis {

inline constexpr int kReportSchemaVersion = 1;

// The settings as they are recorded in report.json (and compared on re-split).
nlohmann::json settings_json(const AuditSettings& settings);

nlohmann::json build_report(const AuditResult& result);

// Serialises with 2-space indent; invalid UTF-8 replaced, never thrown on.
std::string dump_json(const nlohmann::json& j);

}  // namespace tamis
