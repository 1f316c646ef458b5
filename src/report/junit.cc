#include "tamis/report/junit.h"

#include <map>
#include <string>

#include "tamis/base/text.h"
#include "tamis/place/policy.h"

namespace tamis {

namespace {

// XML-escapes and drops characters XML 1.0 forbids (C0 controls but tab, CR, LF),
// and bytes that do not form valid UTF-8.
std::string xml(std::string_view s) {
  std::string out;
  for (size_t i = 0; i < s.size();) {
    const unsigned char c = static_cast<unsigned char>(s[i]);
    const size_t len = utf8_sequence_length(s, i);
    if (!len) {
      out += "\xEF\xBF\xBD";
      ++i;
      continue;
    }
    if (len == 1) {
      switch (c) {
        case '&': out += "&amp;"; break;
        case '<': out += "&lt;"; break;
        case '>': out += "&gt;"; break;
        case '"': out += "&quot;"; break;
        case '\'': out += "&apos;"; break;
        default:
          if (c < 0x20 && c != '\t' && c != '\n' && c != '\r') out += "\xEF\xBF\xBD";
          else out.push_back(static_cast<char>(c));
      }
    } else {
      out.append(s.substr(i, len));
    }
    i += len;
  }
  return out;
}

}  // namespace

void write_junit(std::ostream& os, const AuditResult& r) {
  std::map<std::string, std::vector<size_t>> by_code;
  for (size_t k = 0; k < r.findings.size(); ++k) by_code[r.findings[k].code].push_back(k);
  size_t failures = 0;
  std::map<std::string, bool> failing;
  for (const FindingKind& kind : finding_catalogue()) {
    const std::string code(kind.code);
    bool fail = false;
    for (size_t k : by_code[code])
      if (breaks_policy(r.findings[k].severity, r.known[k], r.fail_on_new_only, r.accepted_reason(k) != nullptr)) fail = true;
    failing[code] = fail;
    failures += fail;
  }
  os << "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  os << "<testsuites name=\"tamis\" tests=\"" << failing.size() << "\" failures=\"" << failures << "\">\n";
  os << "  <testsuite name=\"tamis audit\" tests=\"" << failing.size() << "\" failures=\"" << failures
     << "\" errors=\"0\" skipped=\"0\">\n";
  for (const auto& [code, fail] : failing) {
    os << "    <testcase classname=\"tamis.checks\" name=\"" << xml(code) << "\">\n";
    std::string body;
    for (size_t k : by_code[code]) {
      const Finding& f = r.findings[k];
      body += "[" + std::string(to_string(f.severity)) + (r.baseline.present ? (r.known[k] ? ", known" : ", new") : "") +
              (r.accepted_reason(k) ? ", accepted: " + *r.accepted_reason(k) : std::string()) +
              "] " + f.message + "\n";
      size_t shown = 0;
      for (const auto& p : f.paths) {
        if (shown++ == 200) {
          body += "  ... " + std::to_string(f.paths.size() - 200) + " more in report.json\n";
          break;
        }
        body += "  " + p + "\n";
      }
    }
    if (fail) {
      os << "      <failure type=\"" << xml(code) << "\" message=\"" << xml(code)
         << " breaks the policy\">" << xml(body) << "</failure>\n";
    } else if (!body.empty()) {
      os << "      <system-out>" << xml(body) << "</system-out>\n";
    }
    os << "    </testcase>\n";
  }
  os << "  </testsuite>\n</testsuites>\n";
}

}  // namespace tamis
