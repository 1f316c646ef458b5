#include "tamis/place/baseline.h"

#include <fstream>
#include <stdexcept>

#include <nlohmann/json.hpp>

#include "tamis/base/errors.h"
#include "tamis/place/manifest_reader.h"

namespace tamis {

std::vector<std::string> finding_identities(const Finding& f) {
  std::vector<std::string> out;
  if (f.paths.empty()) out.push_back(f.code + "\t#" + f.message);
  for (const auto& p : f.paths) out.push_back(f.code + "\t" + p);
  return out;
}

Baseline load_baseline(const std::filesystem::path& report_json) {
  std::error_code ec;
  if (std::filesystem::is_directory(report_json, ec))
    throw std::runtime_error("baseline: " + report_json.string() + " is a folder; give the report.json of an earlier audit");
  std::ifstream is(report_json, std::ios::binary);
  if (!is) throw std::runtime_error("baseline: cannot read " + report_json.string());
  nlohmann::json j;
  try {
    j = nlohmann::json::parse(is);
  } catch (const nlohmann::json::exception& e) {
    throw std::runtime_error("baseline: " + report_json.string() + " is " + json_error_text(e.what()));
  }
  if (!j.is_object() || !j.contains("tool") || j["tool"].value("name", "") != "tamis" || !j.contains("findings"))
    throw std::runtime_error("baseline: " + report_json.string() + " is not a tamis report");
  if (!j.contains("schema_version") || !j["schema_version"].is_number_integer() ||
      j["schema_version"].get<int64_t>() != kBaselineReportSchema)
    throw std::runtime_error("baseline: " + report_json.string() + " has schema_version " +
                             (j.contains("schema_version") ? j["schema_version"].dump() : std::string("(none)")) +
                             "; this build reads version " + std::to_string(kBaselineReportSchema));
  Baseline b;
  try {
    for (const auto& jf : j.at("findings")) {
      Finding f;
      f.code = jf.at("code").get<std::string>();
      f.message = jf.at("message").get<std::string>();
      f.paths = jf.at("paths").get<std::vector<std::string>>();
      for (auto& id : finding_identities(f)) b.identities.insert(std::move(id));
      ++b.findings;
    }
  } catch (const nlohmann::json::exception& e) {
    throw std::runtime_error("baseline: malformed findings in " + report_json.string() + ": " + json_error_text(e.what()));
  }
  auto manifest = report_json.parent_path() / "manifest.csv";
  std::ifstream ms(manifest, std::ios::binary);
  if (ms) {
    for (const auto& p : read_manifest_paths(ms)) b.files.insert(p);
    b.has_files = true;
  }
  return b;
}

}  // namespace tamis
