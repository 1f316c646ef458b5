#include "tamis/report/report_json.h"

#include <algorithm>
#include <array>
#include <map>
#include <set>
#include <string_view>

#include "tamis/base/text.h"
#include "tamis/version.h"

namespace tamis {

using nlohmann::json;

json settings_json(const TreeSettings& s, const PlaceSettings& placed) {
  const auto& p = placed.split.percent;
  return json{
      {"seed", placed.split.seed},
      {"split", {{"train", p[0]}, {"val", p[1]}, {"test", p[2]}}},
      {"split_method", placed.split.method == SplitMethod::stable ? "stable" : "shuffle"},
      {"per_class", placed.split.per_class},
      {"folds", placed.split.folds},
      {"resplit", placed.split.resplit},
      {"exclude_flagged", placed.split.exclude_flagged},
      {"one_per_group", placed.split.one_per_group},
      {"class_aliases", placed.classes.aliases},
      {"exclude_classes", placed.classes.excluded},
      {"max_pixels", s.read.decode.max_pixels},
      {"max_image_bytes", s.read.decode.max_image_bytes},
      {"max_bytes", s.read.max_bytes},
      {"reduced_side", s.read.decode.reduced_side},
      {"lookalike_radius", s.groups.radius},
      {"lookalike_min_correlation", s.groups.match.min_correlation},
      {"lookalike_max_local", s.groups.match.max_local},
      {"lookalike_max_chroma", s.groups.match.max_chroma},
      {"lookalike_max_chroma_local", s.groups.match.max_chroma_local},
      {"lookalike_fit_floor", s.groups.match.fit_floor},
      {"lookalike_small_side", s.groups.match.small_side},
      {"lookalike_screen_radius", s.groups.screen_radius},
      {"min_side", placed.checks.min_side},
      {"input_side", placed.checks.input_side},
      {"min_class", placed.checks.min_class},
      {"max_imbalance", placed.checks.max_imbalance},
      {"outlier_z", placed.checks.outlier_z},
      {"mask_folders", s.masks.force},
      {"not_mask_folders", s.masks.forbid},
  };
}

namespace {
json build_report_impl(const AuditResult& r, bool with_paths);
}  // namespace

json build_report(const AuditResult& r) { return build_report_impl(r, true); }

json build_report_without_paths(const AuditResult& r) { return build_report_impl(r, false); }

namespace {

// The classes with their split counts and targets, the balance, and the
// formats and colour modes of the images.
void add_classes(json& j, const AuditResult& r) {
  const PlaceSettings& s = r.placed;
  struct ClassCount {
    uint64_t count = 0;
    std::array<uint64_t, 3> split{};
    uint64_t excluded = 0;
    std::vector<uint64_t> folds;
  };
  std::vector<ClassCount> counts(r.labels.names.size());
  std::map<std::string, uint64_t> formats, modes;
  for (size_t i = 0; i < r.records.size(); ++i) {
    const auto& rec = r.records[i];
    if (rec.kind != FileKind::image) continue;
    ++formats[std::string(to_string(rec.probe.format))];
    ++modes[std::string(to_string(rec.probe.mode)) + "/" + std::to_string(rec.probe.bit_depth)];
    int32_t l = r.labels.label_of[i];
    if (l < 0) continue;
    auto& c = counts[static_cast<size_t>(l)];
    ++c.count;
    if (r.split.placement[i] == Placement::excluded) {
      ++c.excluded;
    } else {
      ++c.split[static_cast<size_t>(r.split.placement[i])];
    }
    if (r.split.fold[i] >= 0) {
      if (c.folds.size() < s.split.folds) c.folds.resize(s.split.folds, 0);
      ++c.folds[static_cast<size_t>(r.split.fold[i])];
    }
  }
  json classes = json::array();
  for (size_t k = 0; k < counts.size(); ++k) {
    const auto& c = counts[k];
    uint64_t placed = c.split[0] + c.split[1] + c.split[2];
    auto share = [&](int sp) { return placed ? double(c.split[sp]) / double(placed) : 0.0; };
    auto target = largest_remainder(placed, s.split.percent);
    json entry = {{"label", r.labels.names[k]},
                  {"count", c.count},
                  {"splits", {{"train", c.split[0]}, {"val", c.split[1]}, {"test", c.split[2]}}},
                  {"excluded", c.excluded},
                  {"shares", {{"train", share(0)}, {"val", share(1)}, {"test", share(2)}}},
                  {"target", {{"train", target[0]}, {"val", target[1]}, {"test", target[2]}}}};
    if (s.split.folds >= 2) {
      std::vector<uint64_t> folds = c.folds;
      folds.resize(s.split.folds, 0);
      entry["folds"] = folds;
    }
    classes.push_back(std::move(entry));
  }
  j["classes"] = std::move(classes);
  // The class map (aliases, left-out classes) with the images each entry moved.
  json aliases = json::array(), left = json::array();
  for (const auto& a : r.class_mapping.aliases) aliases.push_back({{"from", a.from}, {"to", a.to}, {"images", a.images}});
  for (const auto& e : r.class_mapping.excluded) left.push_back({{"label", e.label}, {"images", e.images}});
  j["class_mapping"] = {{"aliases", aliases}, {"excluded", left}};
  Balance bal = class_balance(r.records, r.labels);
  j["balance"] = {{"largest", bal.largest}, {"smallest", bal.smallest}, {"imbalance_ratio", bal.imbalance_ratio},
                  {"normalized_entropy", bal.normalized_entropy}};
  j["formats"] = formats;
  j["modes"] = modes;
}

// The most common stored sizes (for the size scatter), most frequent first.
void add_sizes(json& j, const AuditResult& r) {
  std::map<std::pair<uint32_t, uint32_t>, uint64_t> size_counts;
  for (const auto& rec : r.records)
    if (rec.kind == FileKind::image) ++size_counts[{rec.probe.width, rec.probe.height}];
  std::vector<std::pair<uint64_t, std::pair<uint32_t, uint32_t>>> by_count;
  for (const auto& [wh, n] : size_counts) by_count.push_back({n, wh});
  std::sort(by_count.begin(), by_count.end(), [](const auto& a, const auto& b) {
    return a.first != b.first ? a.first > b.first : a.second < b.second;
  });
  if (by_count.size() > 2000) by_count.resize(2000);
  json sizes = json::array();
  for (const auto& [n, wh] : by_count) sizes.push_back({{"width", wh.first}, {"height", wh.second}, {"count", n}});
  j["sizes"] = std::move(sizes);
  j["distinct_sizes"] = size_counts.size();
}

// Every group with its members, classes, diameter and the links that joined it.
json groups_json(const AuditResult& r) {
  json groups = json::array();
  for (size_t gi = 0; gi < r.groups.groups.size(); ++gi) {
    const Group& g = r.groups.groups[gi];
    std::vector<std::string> paths;
    std::set<std::string> labels;
    for (uint32_t m : g.members) {
      paths.push_back(r.records[m].path);
      if (r.labels.label_of[m] >= 0) labels.insert(r.labels.names[static_cast<size_t>(r.labels.label_of[m])]);
    }
    json links = json::array();
    for (const GroupLink& l : g.links) {
      json link = {{"a", r.records[l.a].path}, {"b", r.records[l.b].path}};
      if (l.turn < 0) {
        link["how"] = "identical";
      } else {
        link["how"] = "look-alike";
        link["turn"] = turn_name(l.turn);
        link["correlation"] = l.correlation;
        link["blur_sigma"] = blur_sigma(l.blur_step);
        link["blurred"] = l.blur_step > 0 ? (l.blurred_a ? "a" : "b") : "none";
        link["fit_source"] = l.fit_source == 1 ? "a" : l.fit_source == 2 ? "b" : "none";
        link["resampled"] = l.resampled;
        link["jpeg_quality"] = l.jpeg_quality;
      }
      links.push_back(std::move(link));
    }
    groups.push_back({{"id", group_id(static_cast<int64_t>(gi))},
                      {"kind", g.exact ? "exact" : "near"},
                      {"paths", paths},
                      {"labels", labels},
                      {"diameter", g.diameter},
                      {"diameter_exact", g.diameter_exact},
                      {"links", links}});
  }
  return groups;
}

// Mask pairs per class, the folder evidence, and every pair.
json masks_json(const AuditResult& r) {
  json pairs = json::array();
  std::map<std::string, uint64_t> pairs_per_class;
  for (size_t i = 0; i < r.records.size(); ++i) {
    if (r.masks.mask_of[i] < 0) continue;
    std::string label = r.labels.label_of[i] >= 0 ? r.labels.names[static_cast<size_t>(r.labels.label_of[i])] : "";
    ++pairs_per_class[label];
    pairs.push_back({{"image", r.records[i].path}, {"mask", r.records[static_cast<size_t>(r.masks.mask_of[i])].path},
                     {"label", label}});
  }
  json evidence = json::array();
  for (const auto& e : r.masks.evidence)
    evidence.push_back({{"folder", e.folder}, {"partner", e.partner}, {"layout", e.layout}, {"pairs", e.pairs},
                        {"confirmed", e.confirmed},
                        {"fraction", e.pairs ? double(e.confirmed) / double(e.pairs) : 0.0},
                        {"accepted", e.accepted}, {"decided_by", e.decided_by}});
  json per_class = json::array();
  for (const auto& [label, n] : pairs_per_class) per_class.push_back({{"label", label}, {"pairs", n}});
  return {{"pairs_per_class", per_class}, {"folders", evidence}, {"pairs", pairs},
          {"layout_roots", r.masks.layout_roots}};
}

// The findings (with their paths, or without for the page's embedded copy), the
// policy's verdict and the baseline's comparison.
void add_findings(json& j, const AuditResult& r, bool with_paths) {
  json findings = json::array();
  for (size_t k = 0; k < r.findings.size(); ++k) {
    const auto& f = r.findings[k];
    json jf = {{"code", f.code}, {"severity", to_string(f.severity)}, {"message", f.message}, {"details", f.details}};
    if (with_paths) jf["paths"] = f.paths;
    if (r.baseline.present) jf["baseline"] = r.known[k] ? "known" : "new";
    if (const std::string* why = r.accepted_reason(k)) jf["accepted"] = *why;
    findings.push_back(std::move(jf));
  }
  j["findings"] = std::move(findings);
  // Accept entries that accepted nothing (fixed, or a typo): stale entries show.
  json unused = json::array();
  std::vector<bool> used(r.accept.size(), false);
  for (int e : r.accepted)
    if (e >= 0 && static_cast<size_t>(e) < used.size()) used[static_cast<size_t>(e)] = true;
  for (size_t e = 0; e < r.accept.size(); ++e) {
    if (used[e]) continue;
    const AcceptEntry& a = r.accept[e];
    json ju = {{"code", a.code}, {"reason", a.reason}};
    if (!a.group.empty()) ju["group"] = a.group;
    else ju["paths"] = a.paths;
    unused.push_back(std::move(ju));
  }
  j["accept_unused"] = std::move(unused);
  j["policy"] = {{"fail_on", r.fail_on_new_only ? "new" : "all"}, {"exit_status", policy_exit_status(r)}};
  if (r.baseline.present) {
    j["baseline"] = {{"files_added", r.baseline.files_added},
                     {"files_removed", r.baseline.files_removed},
                     {"findings_new", r.baseline.findings_new},
                     {"findings_known", r.baseline.findings_known},
                     {"findings_gone", r.baseline.findings_gone}};
  }

}

// Files left aside (ignored) and files that could not be read, with their reasons.
void add_files_aside(json& j, const AuditResult& r) {
  json ignored = json::array(), unreadable = json::array();
  for (const auto& rec : r.records) {
    if (rec.kind == FileKind::ignored) ignored.push_back({{"path", rec.path}, {"reason", defect_code(rec.defect)}});
    if (rec.kind == FileKind::unreadable)
      unreadable.push_back({{"path", rec.path}, {"reason", defect_code(rec.defect)}});
  }
  j["ignored"] = std::move(ignored);
  j["unreadable"] = std::move(unreadable);
}

json build_report_impl(const AuditResult& r, bool with_paths) {
  const PlaceSettings& s = r.placed;
  json j;
  j["schema_version"] = kReportSchemaVersion;
  j["tool"] = {{"name", kToolName}, {"version", kToolVersion}};
  // ROOT as the command was given it, made absolute (the CLI does): manifest
  // paths are relative to it. A name that is not UTF-8 in the manifest's escape
  // (docs/outputs.md: name_escape), and "escaped" says so.
  const std::string root = r.settings.root.string();
  const bool escaped = !is_utf8(root);
  j["root"] = {{"path", escaped ? escape_name(root) : root}, {"escaped", escaped}};
  j["settings"] = settings_json(r.settings, r.placed);
  j["totals"] = {{"files_seen", r.totals.files_seen}, {"images", r.totals.images}, {"masks", r.totals.masks},
                 {"unreadable", r.totals.unreadable}, {"ignored", r.totals.ignored}};
  j["layout"] = {{"pre_split", r.labels.pre_split}};
  j["split"] = {{"kept_from_folders", r.labels.pre_split && !s.split.resplit}, {"kept_from_manifest", r.split.kept}};

  add_classes(j, r);
  add_sizes(j, r);
  j["groups"] = groups_json(r);
  j["masks"] = masks_json(r);
  j["lookalike_search"] = {{"exact_pairs", r.groups.exact_pairs},
                           {"candidate_hits", r.groups.candidate_hits},
                           {"confirmed_pairs", r.groups.confirmed_pairs}};

  add_findings(j, r, with_paths);
  add_files_aside(j, r);
  return j;
}

}  // namespace

std::string dump_json(const json& j) { return j.dump(2, ' ', false, json::error_handler_t::replace); }

namespace {

// A string as nlohmann::json writes it (quoted, escaped, invalid UTF-8 replaced):
// printable ASCII without quote or backslash as it is, anything else by nlohmann.
void append_string(std::string& out, std::string_view s) {
  bool plain = true;
  for (unsigned char c : s)
    if (c < 0x20 || c > 0x7e || c == '"' || c == '\\') {
      plain = false;
      break;
    }
  if (plain) {
    out.push_back('"');
    out.append(s);
    out.push_back('"');
  } else {
    out.append(json(std::string(s)).dump(-1, ' ', false, json::error_handler_t::replace));
  }
}

void indent_to(std::string& out, int n) { out.append(static_cast<size_t>(n), ' '); }

// An array of strings in dump(2) layout, at `indent`.
void append_strings(std::string& out, const std::vector<std::string>& items, int indent) {
  if (items.empty()) {
    out.append("[]");
    return;
  }
  out.append("[\n");
  for (size_t k = 0; k < items.size(); ++k) {
    if (k) out.append(",\n");
    indent_to(out, indent + 2);
    append_string(out, items[k]);
  }
  out.push_back('\n');
  indent_to(out, indent);
  out.push_back(']');
}

// nlohmann::json's dump(2) layout, written here so that a finding's paths can
// come straight from the Finding. `findings`, when set, holds the elements of
// the top-level "findings" array; `paths`, when set, is written as the member
// "paths" of the object `v` (in its place in key order, as the object's own
// members are sorted).
void append_json(std::string& out, const json& v, int indent, const std::vector<Finding>* findings,
                 const std::vector<std::string>* paths) {
  switch (v.type()) {
    case json::value_t::string: append_string(out, v.get_ref<const std::string&>()); return;
    case json::value_t::object: {
      if (v.empty() && !paths) {
        out.append("{}");
        return;
      }
      out.append("{\n");
      bool first = true;
      auto member = [&](const std::string& key) {
        if (!first) out.append(",\n");
        first = false;
        indent_to(out, indent + 2);
        append_string(out, key);
        out.append(": ");
      };
      for (auto it = v.begin(); it != v.end(); ++it) {
        if (paths && it.key() > "paths") {
          member("paths");
          append_strings(out, *paths, indent + 2);
          paths = nullptr;
        }
        member(it.key());
        append_json(out, it.value(), indent + 2, indent == 0 && it.key() == "findings" ? findings : nullptr, nullptr);
      }
      if (paths) {
        member("paths");
        append_strings(out, *paths, indent + 2);
      }
      out.push_back('\n');
      indent_to(out, indent);
      out.push_back('}');
      return;
    }
    case json::value_t::array: {
      if (v.empty()) {
        out.append("[]");
        return;
      }
      out.append("[\n");
      for (size_t k = 0; k < v.size(); ++k) {
        if (k) out.append(",\n");
        indent_to(out, indent + 2);
        const bool finding = findings && k < findings->size() && v[k].is_object() && !v[k].contains("paths");
        append_json(out, v[k], indent + 2, nullptr, finding ? &(*findings)[k].paths : nullptr);
      }
      out.push_back('\n');
      indent_to(out, indent);
      out.push_back(']');
      return;
    }
    default: out.append(v.dump(-1, ' ', false, json::error_handler_t::replace)); return;
  }
}

}  // namespace

void write_report_json(std::string& out, const json& report_without_paths, const std::vector<Finding>& findings) {
  append_json(out, report_without_paths, 0, &findings, nullptr);
  out.push_back('\n');
}

}  // namespace tamis
