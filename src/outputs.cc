#include "tamis/outputs.h"

#include <stdexcept>

#include "tamis/atomic_file.h"
#include "tamis/index_file.h"
#include "tamis/manifest.h"
#include "tamis/report_html.h"
#include "tamis/report_json.h"

namespace tamis {

void write_outputs(const std::filesystem::path& out_dir, const AuditResult& result) {
  std::error_code ec;
  std::filesystem::create_directories(out_dir, ec);
  if (ec) throw std::runtime_error("cannot create output folder " + out_dir.string() + ": " + ec.message());
  write_file_atomically(out_dir / "manifest.csv", [&](std::ostream& os) { write_manifest(os, result); });
  nlohmann::json report = build_report(result);
  write_file_atomically(out_dir / "report.json", [&](std::ostream& os) { os << dump_json(report) << '\n'; });
  write_file_atomically(out_dir / "report.html", [&](std::ostream& os) { os << render_html(report); });
  save_index(out_dir / kIndexFileName, result);
}

}  // namespace tamis
