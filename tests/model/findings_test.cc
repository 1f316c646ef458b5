// The finding catalogue (model/findings.h) is the one list of codes: every
// entry is documented, with the same default severity, on the page it names;
// every code a check raises is in it; the policy accepts exactly its codes.
// Reference: the project's own docs (docs/findings.md, docs/masks.md), read as
// the user reads them: a Markdown table row naming the code in backquotes, whose
// second column is the default severity.
#include <catch2/catch.hpp>

#include <fstream>
#include <sstream>
#include <string>

#include "tamis/model/findings.h"
#include "tamis/place/policy.h"

using namespace tamis;

namespace {

std::string read_doc(std::string_view page) {
  std::ifstream f(std::string(TAMIS_SOURCE_DIR) + "/" + std::string(page));
  REQUIRE(f.good());
  std::stringstream ss;
  ss << f.rdbuf();
  return ss.str();
}

// The second cell of the table row that names `code` in backquotes in its first cell.
std::string documented_severity(const std::string& doc, std::string_view code) {
  std::istringstream lines(doc);
  const std::string quoted = "`" + std::string(code) + "`";
  for (std::string line; std::getline(lines, line);) {
    if (line.rfind("| ", 0) != 0) continue;
    const size_t end1 = line.find(" | ", 2);
    if (end1 == std::string::npos || line.substr(2, end1 - 2).find(quoted) == std::string::npos) continue;
    const size_t end2 = line.find(" |", end1 + 3);
    return line.substr(end1 + 3, end2 - end1 - 3);
  }
  return "";
}

}  // namespace

TEST_CASE("every catalogued finding is documented with its default severity", "[findings]") {
  const auto& c = finding_catalogue();
  REQUIRE(c.size() >= 40);
  for (size_t i = 0; i < c.size(); ++i) {
    INFO(c[i].code);
    if (i > 0) CHECK(c[i - 1].code < c[i].code);  // sorted, no repeats
    CHECK(!c[i].title.empty());
    CHECK(documented_severity(read_doc(c[i].doc), c[i].code) == to_string(c[i].severity));
    CHECK(finding_kind(c[i].code) == &c[i]);
    const Finding f = make_finding(c[i].code);
    CHECK(f.code == c[i].code);
    CHECK(f.severity == c[i].severity);
  }
  CHECK(finding_kind("near-duplicate") == nullptr);
  CHECK_THROWS_AS(make_finding("no-such-code"), std::logic_error);
}

TEST_CASE("the policy accepts exactly the catalogue's codes", "[findings][policy]") {
  for (const FindingKind& k : finding_catalogue())
    CHECK_NOTHROW(parse_policy(R"({"severity": {")" + std::string(k.code) + R"(": "info"}})"));
  CHECK_THROWS_AS(parse_policy(R"({"severity": {"exact-duplicate": "info"}})"), PolicyError);
}

TEST_CASE("one rule decides what breaks the policy", "[findings][policy]") {
  CHECK(breaks_policy(Severity::error, false, false));
  CHECK(breaks_policy(Severity::error, true, false));
  CHECK(breaks_policy(Severity::error, false, true));
  CHECK_FALSE(breaks_policy(Severity::error, true, true));  // known to the baseline, fail_on "new"
  CHECK_FALSE(breaks_policy(Severity::warning, false, false));
  CHECK_FALSE(breaks_policy(Severity::info, false, false));
}
