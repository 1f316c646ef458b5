// report.html: one self-contained page (inline CSS and SVG, thumbnails as data
// URIs, one small inline script for filtering and sorting the findings, allowed
// by its hash in the page's Content-Security-Policy; no network, no external
// assets; readable without the script) for a person vetting a collection.
//
// Every string that comes from the data set (paths, labels, messages quoting
// them) is HTML-escaped, so no file name can become markup or script.
// Long lists are cut to their first rows; the full lists are in report.json
// and manifest.csv. Rendering only: computes nothing beyond sums for display.
#pragma once

#include <map>
#include <string>
#include <utility>
#include <vector>
#include <string_view>

#include <nlohmann/json.hpp>

#include "tamis/model/findings.h"

namespace tamis {

// Escapes & < > " ' for use in HTML text and attribute values.
std::string html_escape(std::string_view s);

// Small pictures: group id, "#masks" (image with its mask drawn over it, then the
// mask, pair by pair) or "#flag:CODE" (the first images a quality finding names)
// -> (path, "data:image/jpeg;base64,…").
using Thumbnails = std::map<std::string, std::vector<std::pair<std::string, std::string>>>;
inline constexpr size_t kFlaggedShown = 6;  // pictures of a quality finding's images

// Renders the page from the report JSON (so the page never shows a number the
// JSON does not hold) and the group thumbnails. A report made without the
// findings' paths (build_report_without_paths) takes them from `findings`, the
// list it was made from.
std::string render_html(const nlohmann::json& report, const Thumbnails& thumbs = {},
                        const std::vector<Finding>* findings = nullptr);

}  // namespace tamis
