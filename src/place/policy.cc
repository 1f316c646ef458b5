#include "tamis/place/policy.h"

#include <algorithm>
#include <fstream>
#include <sstream>

#include <nlohmann/json.hpp>

#include "tamis/base/errors.h"
#include "tamis/place/leave_out.h"

namespace tamis {

using nlohmann::json;

Policy default_policy() { return Policy{}; }

namespace {

double number_at(const json& j, const std::string& key, double lo, double hi) {
  if (!j.is_number()) throw PolicyError("policy: thresholds." + key + " must be a number");
  double v = j.get<double>();
  if (!(v >= lo && v <= hi))
    throw PolicyError("policy: thresholds." + key + " must lie in [" + std::to_string(lo) + ", " + std::to_string(hi) + "]");
  return v;
}

}  // namespace

Policy parse_policy(const std::string& text) {
  json j;
  try {
    j = json::parse(text);
  } catch (const json::exception& e) {  // parse_error, or out_of_range for a number like 1E400
    throw PolicyError("policy: " + json_error_text(e.what()));
  }
  if (!j.is_object()) throw PolicyError("policy: the file must hold a JSON object");
  Policy p = default_policy();
  for (const auto& [key, value] : j.items()) {
    if (key == "severity") {
      if (!value.is_object()) throw PolicyError("policy: severity must be an object of code: level");
      for (const auto& [code, level] : value.items()) {
        if (!finding_kind(code)) throw PolicyError("policy: severity." + code + ": no such finding code");
        if (!level.is_string()) throw PolicyError("policy: severity." + code + " must be a string");
        std::string l = level.get<std::string>();
        if (l == "error") p.severity[code] = Severity::error;
        else if (l == "warning") p.severity[code] = Severity::warning;
        else if (l == "info") p.severity[code] = Severity::info;
        else if (l == "off") p.severity[code] = std::nullopt;
        else throw PolicyError("policy: severity." + code + " must be error, warning, info or off, not '" + l + "'");
      }
    } else if (key == "thresholds") {
      if (!value.is_object()) throw PolicyError("policy: thresholds must be an object");
      for (const auto& [name, v] : value.items()) {
        if (name == "min_side") p.thresholds.min_side = static_cast<uint32_t>(number_at(v, name, 0, 1e6));
        else if (name == "input_side") p.thresholds.input_side = static_cast<uint32_t>(number_at(v, name, 0, 1e6));
        else if (name == "min_class") p.thresholds.min_class = static_cast<uint64_t>(number_at(v, name, 0, 1e12));
        else if (name == "max_imbalance") p.thresholds.max_imbalance = number_at(v, name, 1, 1e12);
        else if (name == "outlier_z") p.thresholds.outlier_z = number_at(v, name, 0.5, 100);
        else if (name == "max_unreadable_share") p.max_unreadable_share = number_at(v, name, 0, 1);
        else throw PolicyError("policy: thresholds." + name + ": no such threshold");
      }
    } else if (key == "lookalike") {
      if (!value.is_object()) throw PolicyError("policy: lookalike must be an object");
      for (const auto& [name, v] : value.items()) {
        if (name == "radius") p.lookalike.radius = static_cast<int>(number_at(v, "lookalike.radius", 0, 16));
        else if (name == "min_correlation") p.lookalike.match.min_correlation = number_at(v, "lookalike.min_correlation", 0.5, 1);
        else if (name == "max_local") p.lookalike.match.max_local = number_at(v, "lookalike.max_local", 0, 4);
        else if (name == "max_chroma") p.lookalike.match.max_chroma = number_at(v, "lookalike.max_chroma", 0, 100);
        else if (name == "max_chroma_local")
          p.lookalike.match.max_chroma_local = number_at(v, "lookalike.max_chroma_local", 0, 100);
        else if (name == "fit_floor") p.lookalike.match.fit_floor = number_at(v, "lookalike.fit_floor", 0.5, 1);
        else if (name == "small_side") p.lookalike.match.small_side = number_at(v, "lookalike.small_side", 0, 4096);
        else if (name == "screen_radius") p.lookalike.screen_radius = number_at(v, "lookalike.screen_radius", 0, 0.5);
        else throw PolicyError("policy: lookalike." + name + ": no such setting (radius, screen_radius, min_correlation, max_local, max_chroma, max_chroma_local, fit_floor, small_side)");
      }
    } else if (key == "exclude_flagged") {
      if (!value.is_array()) throw PolicyError("policy: exclude_flagged must be a list of finding codes");
      for (const auto& c : value) {
        if (!c.is_string()) throw PolicyError("policy: exclude_flagged must be a list of finding codes");
        const std::string code = c.get<std::string>();
        if (!excludable_code(code))
          throw PolicyError("policy: exclude_flagged: '" + code +
                            "' is not a finding code that names images before the split (docs/findings.md)");
        p.exclude_flagged.push_back(code);  // sorted with the command line's (resolve_leave_out)
      }
    } else if (key == "class_aliases") {
      if (!value.is_object()) throw PolicyError("policy: class_aliases must be an object {\"variant\": \"class\"}");
      for (const auto& [from, to] : value.items()) {
        if (!to.is_string()) throw PolicyError("policy: class_aliases." + from + " must be a class name");
        p.classes.aliases[from] = to.get<std::string>();
      }
    } else if (key == "exclude_classes") {
      if (!value.is_array()) throw PolicyError("policy: exclude_classes must be a list of class names");
      for (const auto& c : value) {
        if (!c.is_string()) throw PolicyError("policy: exclude_classes must be a list of class names");
        p.classes.excluded.insert(c.get<std::string>());
      }
    } else if (key == "accept") {
      if (!value.is_array()) throw PolicyError("policy: accept must be a list of {code, paths or group, reason}");
      for (const auto& e : value) {
        if (!e.is_object()) throw PolicyError("policy: accept must be a list of {code, paths or group, reason}");
        AcceptEntry a;
        for (const auto& [name, v] : e.items()) {
          if (name == "code" && v.is_string()) a.code = v.get<std::string>();
          else if (name == "reason" && v.is_string()) a.reason = v.get<std::string>();
          else if (name == "group" && v.is_string()) a.group = v.get<std::string>();
          else if (name == "paths" && v.is_array()) {
            for (const auto& p : v) {
              if (!p.is_string()) throw PolicyError("policy: accept: paths must be strings");
              a.paths.push_back(p.get<std::string>());
            }
          } else {
            throw PolicyError("policy: accept: '" + name + "' is not a key of an entry (code, paths, group, reason) or has the wrong type");
          }
        }
        if (!finding_kind(a.code)) throw PolicyError("policy: accept: '" + a.code + "' is not a finding code (docs/findings.md)");
        if (a.reason.empty()) throw PolicyError("policy: accept: the entry for '" + a.code + "' needs a reason");
        if (a.paths.empty() == a.group.empty())
          throw PolicyError("policy: accept: the entry for '" + a.code + "' needs either paths or a group");
        std::sort(a.paths.begin(), a.paths.end());
        p.accept.push_back(std::move(a));
      }
    } else if (key == "one_per_group") {
      if (!value.is_boolean()) throw PolicyError("policy: one_per_group must be true or false");
      p.one_per_group = value.get<bool>();
    } else if (key == "fail_on") {
      if (value == "new") p.fail_on_new_only = true;
      else if (value == "all") p.fail_on_new_only = false;
      else throw PolicyError("policy: fail_on must be \"all\" or \"new\"");
    } else {
      throw PolicyError("policy: " + key + ": no such key (severity, thresholds, lookalike, exclude_flagged, one_per_group, class_aliases, exclude_classes, accept, fail_on)");
    }
  }
  try {
    validate_class_map(p.classes);
  } catch (const std::invalid_argument& e) {
    throw PolicyError(std::string("policy: ") + e.what());
  }
  return p;
}

Policy load_policy(const std::filesystem::path& file) {
  std::error_code ec;
  if (std::filesystem::is_directory(file, ec)) throw PolicyError("policy: this is a folder, not a policy file");
  std::ifstream is(file, std::ios::binary);
  if (!is) throw PolicyError("policy: cannot read " + file.string());
  std::stringstream ss;
  ss << is.rdbuf();
  return parse_policy(ss.str());
}

void apply_policy(const Policy& policy, uint64_t unreadable, uint64_t image_files, std::vector<Finding>& findings) {
  if (image_files > 0 && double(unreadable) / double(image_files) > policy.max_unreadable_share) {
    Finding f = make_finding("too-many-unreadable");
    f.message = std::to_string(unreadable) + " of " + std::to_string(image_files) +
                " image files cannot be read, more than the policy allows";
    f.details = {{"unreadable", unreadable}, {"image_files", image_files},
                 {"max_unreadable_share", policy.max_unreadable_share}};
    findings.push_back(std::move(f));
  }
  std::vector<Finding> kept;
  for (auto& f : findings) {
    auto it = policy.severity.find(f.code);
    if (it != policy.severity.end()) {
      if (!it->second) continue;  // off
      f.severity = *it->second;
    }
    kept.push_back(std::move(f));
  }
  findings = std::move(kept);
}

std::vector<int> match_accepts(const std::vector<AcceptEntry>& accept, const std::vector<Finding>& findings) {
  std::vector<int> out(findings.size(), -1);
  for (size_t k = 0; k < findings.size(); ++k) {
    const Finding& f = findings[k];
    for (size_t e = 0; e < accept.size() && out[k] < 0; ++e) {
      const AcceptEntry& a = accept[e];
      if (a.code != f.code) continue;
      bool ok;
      if (!a.group.empty()) {
        ok = f.details.is_object() && f.details.contains("group") && f.details["group"].is_string() &&
             f.details["group"].get<std::string>() == a.group;
      } else {
        ok = !f.paths.empty() && std::all_of(f.paths.begin(), f.paths.end(), [&](const std::string& p) {
          return std::binary_search(a.paths.begin(), a.paths.end(), p);
        });
      }
      if (ok) out[k] = static_cast<int>(e);
    }
  }
  return out;
}

}  // namespace tamis
