// report.html: one self-contained page (inline CSS, no network, no external
// assets, no script needed to read it) for a person vetting a collection.
//
// Every string that comes from the data set (paths, labels, messages quoting
// them) is HTML-escaped, so no file name can become markup or script.
// Long lists are cut to their first rows; the full lists are in report.json
// and manifest.csv. Rendering only: computes nothing beyond sums for display.
#pragma once

#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

namespace tamis {

// Escapes & < > " ' for use in HTML text and attribute values.
std::string html_escape(std::string_view s);

// Renders the page from the report JSON (so the page never shows a number the
// JSON does not hold).
std::string render_html(const nlohmann::json& report);

}  // namespace tamis
