#include "tamis/model/findings.h"

#include <algorithm>
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
