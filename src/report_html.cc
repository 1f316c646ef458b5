#include "tamis/report_html.h"

#include <algorithm>
#include <sstream>

namespace tamis {

using nlohmann::json;

std::string html_escape(std::string_view s) {
  std::string out;
  out.reserve(s.size() + 16);
  for (char c : s) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out.push_back(c);
    }
  }
  return out;
}

namespace {

constexpr size_t kMaxRows = 200;  // rows per list on the page; the JSON has them all

std::string str(const json& j) {
  if (j.is_string()) return j.get<std::string>();
  return j.dump(-1, ' ', false, json::error_handler_t::replace);
}
std::string esc(const json& j) { return html_escape(str(j)); }

const char* kStyle = R"CSS(
:root{--ink:#1d2a30;--paper:#f6f1e9;--card:#fffdf8;--rule:#d9cfbf;--teal:#0f4c5c;--ochre:#e36414;--moss:#5f7f3a;--plum:#7a3b69}
*{box-sizing:border-box}body{margin:0;font:15px/1.45 system-ui,-apple-system,"Segoe UI",sans-serif;color:var(--ink);background:var(--paper)}
header{background:var(--teal);color:#fff;padding:18px 28px}header h1{margin:0;font-size:22px;letter-spacing:.5px}
header p{margin:4px 0 0;opacity:.85;font-size:13px}main{padding:18px 28px;max-width:1200px}
section{background:var(--card);border:1px solid var(--rule);border-radius:6px;padding:14px 18px;margin:0 0 16px}
h2{margin:0 0 10px;font-size:17px;color:var(--teal)}
.tiles{display:flex;flex-wrap:wrap;gap:10px}.tile{border-left:4px solid var(--teal);padding:6px 12px;min-width:120px;background:#fbf7f0}
.tile b{display:block;font-size:22px}.tile.bad{border-color:var(--ochre)}.tile.mute{border-color:#9aa5a8}
table{border-collapse:collapse;width:100%;font-size:13.5px}th,td{text-align:left;padding:4px 8px;border-bottom:1px solid #ece4d6;vertical-align:top}
th{background:#f1ebe0;font-weight:600}td.num{text-align:right;font-variant-numeric:tabular-nums}
.bar{display:flex;height:12px;min-width:40px;background:#eee6d8;border-radius:2px;overflow:hidden}
.bar span{display:block;height:100%}.tr{background:var(--teal)}.va{background:var(--moss)}.te{background:var(--ochre)}.ex{background:#b9b2a6}
.sev{font-weight:600;padding:1px 6px;border-radius:3px;font-size:12px;color:#fff}.sev.error{background:#b3261e}.sev.warning{background:var(--ochre)}.sev.info{background:#5b7083}
code,.path{font-family:ui-monospace,Menlo,Consolas,monospace;font-size:12.5px;word-break:break-all;white-space:pre-wrap}
.note{color:#5d6b70;font-size:12.5px}.legend span{display:inline-block;width:10px;height:10px;margin:0 4px 0 10px;border-radius:2px}
)CSS";

void tiles(std::ostringstream& o, const json& t) {
  o << "<section id=\"inventory\"><h2>Inventory</h2><div class=\"tiles\">";
  auto tile = [&](const char* name, const char* key, const char* cls) {
    o << "<div class=\"tile " << cls << "\"><b>" << esc(t.value(key, json(0))) << "</b>" << name << "</div>";
  };
  tile("files seen", "files_seen", "");
  tile("images", "images", "");
  tile("masks", "masks", "mute");
  tile("unreadable", "unreadable", t.value("unreadable", 0) > 0 ? "bad" : "mute");
  tile("ignored", "ignored", "mute");
  o << "</div></section>\n";
}

void classes(std::ostringstream& o, const json& report) {
  const json& cl = report.value("classes", json::array());
  o << "<section id=\"classes\"><h2>Classes and splits</h2>";
  if (cl.empty()) {
    o << "<p class=\"note\">No labelled images.</p></section>\n";
    return;
  }
  uint64_t largest = 0, smallest = UINT64_MAX;
  for (const auto& c : cl) {
    uint64_t n = c.value("count", uint64_t{0});
    largest = std::max(largest, n);
    smallest = std::min(smallest, n);
  }
  o << "<p class=\"note\">" << cl.size() << " classes; largest " << largest << ", smallest " << smallest;
  if (smallest > 0) o << ", imbalance ratio " << (largest * 100 / smallest) / 100.0;
  o << ".<span class=\"legend\"><span class=\"tr\"></span>train<span class=\"va\"></span>val"
       "<span class=\"te\"></span>test<span class=\"ex\"></span>excluded</span></p>";
  o << "<table><tr><th>class</th><th class=\"num\">images</th><th class=\"num\">train</th><th class=\"num\">val</th>"
       "<th class=\"num\">test</th><th style=\"width:40%\">share of the largest class</th></tr>";
  size_t shown = 0;
  for (const auto& c : cl) {
    if (shown++ == kMaxRows) break;
    uint64_t n = c.value("count", uint64_t{0});
    const json& s = c.value("splits", json::object());
    uint64_t tr = s.value("train", uint64_t{0}), va = s.value("val", uint64_t{0}), te = s.value("test", uint64_t{0});
    uint64_t ex = c.value("excluded", uint64_t{0});
    double w = largest ? 100.0 * n / largest : 0;
    auto pct = [&](uint64_t k) { return n ? 100.0 * k / n : 0.0; };
    o << "<tr><td class=\"path\">" << esc(c.value("label", json(""))) << "</td><td class=\"num\">" << n
      << "</td><td class=\"num\">" << tr << "</td><td class=\"num\">" << va << "</td><td class=\"num\">" << te
      << "</td><td><div class=\"bar\" style=\"width:" << w << "%\"><span class=\"tr\" style=\"width:" << pct(tr)
      << "%\"></span><span class=\"va\" style=\"width:" << pct(va) << "%\"></span><span class=\"te\" style=\"width:"
      << pct(te) << "%\"></span><span class=\"ex\" style=\"width:" << pct(ex) << "%\"></span></div></td></tr>";
  }
  o << "</table>";
  if (cl.size() > kMaxRows) o << "<p class=\"note\">First " << kMaxRows << " of " << cl.size() << " classes.</p>";
  o << "</section>\n";
}

void storage(std::ostringstream& o, const json& report) {
  o << "<section id=\"storage\"><h2>Formats and colour modes</h2><table><tr><th>format</th><th class=\"num\">images</th></tr>";
  const json formats = report.value("formats", json::object());
  const json modes = report.value("modes", json::object());
  for (const auto& [k, v] : formats.items())
    o << "<tr><td>" << html_escape(k) << "</td><td class=\"num\">" << esc(v) << "</td></tr>";
  o << "</table><br><table><tr><th>mode / bits per sample</th><th class=\"num\">images</th></tr>";
  for (const auto& [k, v] : modes.items())
    o << "<tr><td>" << html_escape(k) << "</td><td class=\"num\">" << esc(v) << "</td></tr>";
  o << "</table></section>\n";
}

void findings(std::ostringstream& o, const json& report) {
  const json& fs = report.value("findings", json::array());
  o << "<section id=\"findings\"><h2>Findings</h2>";
  if (fs.empty()) {
    o << "<p class=\"note\">Nothing to report.</p></section>\n";
    return;
  }
  o << "<table><tr><th>severity</th><th>code</th><th>what</th><th>files</th></tr>";
  size_t shown = 0;
  for (const auto& f : fs) {
    if (shown++ == kMaxRows) break;
    std::string sev = str(f.value("severity", json("info")));
    o << "<tr><td><span class=\"sev " << html_escape(sev) << "\">" << html_escape(sev) << "</span></td><td><code>"
      << esc(f.value("code", json(""))) << "</code></td><td>" << esc(f.value("message", json(""))) << "</td><td>";
    const json& paths = f.value("paths", json::array());
    size_t k = 0;
    for (const auto& p : paths) {
      if (k++ == 20) {
        o << "<div class=\"note\">… and " << paths.size() - 20 << " more (see report.json)</div>";
        break;
      }
      o << "<div class=\"path\">" << esc(p) << "</div>";
    }
    o << "</td></tr>";
  }
  o << "</table>";
  if (fs.size() > kMaxRows) o << "<p class=\"note\">First " << kMaxRows << " of " << fs.size() << " findings.</p>";
  o << "</section>\n";
}

void ignored(std::ostringstream& o, const json& report) {
  const json& ig = report.value("ignored", json::array());
  if (ig.empty()) return;
  o << "<section id=\"ignored\"><h2>Files left aside</h2><table><tr><th>path</th><th>why</th></tr>";
  size_t shown = 0;
  for (const auto& e : ig) {
    if (shown++ == kMaxRows) break;
    o << "<tr><td class=\"path\">" << esc(e.value("path", json(""))) << "</td><td>" << esc(e.value("reason", json("")))
      << "</td></tr>";
  }
  o << "</table>";
  if (ig.size() > kMaxRows) o << "<p class=\"note\">First " << kMaxRows << " of " << ig.size() << ".</p>";
  o << "</section>\n";
}

}  // namespace

std::string render_html(const json& report) {
  std::ostringstream o;
  const json& tool = report.value("tool", json::object());
  o << "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
       "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:\">"
       "<meta name=\"viewport\" content=\"width=device-width,initial-scale=1\"><title>tamis audit</title><style>"
    << kStyle << "</style></head><body>\n<header><h1>tamis audit</h1><p>" << esc(tool.value("name", json("tamis")))
    << " " << esc(tool.value("version", json(""))) << " · seed "
    << esc(report.value("settings", json::object()).value("seed", json(1))) << "</p></header><main>\n";
  tiles(o, report.value("totals", json::object()));
  findings(o, report);
  classes(o, report);
  storage(o, report);
  ignored(o, report);
  o << "</main></body></html>\n";
  return o.str();
}

}  // namespace tamis
