// Findings: what the checks conclude, as data.
//
// A Finding has a stable code (kebab-case, the project's own vocabulary), a
// severity, the paths it concerns (sorted), a message a person understands,
// and the measurements behind it. Checks create findings; reports render
// them; nothing else prints them. The policy (its own issue) may change a
// finding's severity by code.
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

// Sorts findings by (severity desc, code, first path) and each finding's paths
// bytewise, so reports list them the same way on every run.
void sort_findings(std::vector<Finding>& findings);

}  // namespace tamis
