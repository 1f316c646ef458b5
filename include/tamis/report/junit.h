// JUnit XML (the de facto format CI systems show as test results): one test
// case per check (every finding code in the catalogue), failing when that code
// has an error-severity finding that breaks the policy; the failure lists the
// finding messages and paths. Warnings and infos are reported as system-out of
// a passing case. Rendering only. Every string is XML-escaped; bytes that are
// not allowed in XML 1.0 are replaced with U+FFFD.
#pragma once

#include <ostream>

#include "tamis/pipeline/audit.h"

namespace tamis {

void write_junit(std::ostream& os, const AuditResult& result);

}  // namespace tamis
