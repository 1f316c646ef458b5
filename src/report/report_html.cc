#include "tamis/report/report_html.h"

#include <algorithm>
#include <cmath>
#include <set>
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

// The member `key` of object `j` by reference, or an empty array / object when
// it is missing (json::value() would copy it: a finding's paths can be 70,000).
const json& array_at(const json& j, const char* key) {
  static const json empty = json::array();
  if (!j.is_object()) return empty;
  auto it = j.find(key);
  return it != j.end() ? *it : empty;
}
const json& object_at(const json& j, const char* key) {
  static const json empty = json::object();
  if (!j.is_object()) return empty;
  auto it = j.find(key);
  return it != j.end() ? *it : empty;
}

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
.note{color:#5d6b70;font-size:12.5px}.filters{display:flex;gap:14px;align-items:center;margin:0 0 8px;font-size:13px}
.group{border-top:1px solid #ece4d6;padding:8px 0}.gh{font-size:13px;margin-bottom:4px}.strip{display:flex;gap:8px;flex-wrap:wrap}
figure{margin:0;width:168px}figure img,.nothumb{width:160px;height:160px;object-fit:contain;border:1px solid var(--rule);background:#eee6d8}
figure:focus-within{width:264px}figure img:focus,.mini img:focus{width:256px;height:256px;outline:2px solid var(--ochre)}
code.code{word-break:normal;white-space:nowrap}details summary{cursor:pointer;color:#5d6b70;font-size:12.5px}
.bycode{display:flex;flex-wrap:wrap;gap:6px 14px;margin:0 0 10px;font-size:13px}.bycode a{cursor:pointer;color:var(--ink);text-decoration:none;border-bottom:1px dotted var(--rule)}
.mini{margin-top:4px}.mini img{width:128px;height:128px;object-fit:contain;border:1px solid var(--rule);background:#eee6d8}
figcaption{font-size:10.5px}table.narrow{width:auto;margin-top:8px}.legend span{display:inline-block;width:10px;height:10px;margin:0 4px 0 10px;border-radius:2px}
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
  const json& cl = array_at(report, "classes");
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
  if (smallest > 0) o << "; imbalance " << (largest * 100 / smallest) / 100.0 << ":1";
  o << "<span class=\"legend\"><span class=\"tr\"></span>train<span class=\"va\"></span>val"
       "<span class=\"te\"></span>test<span class=\"ex\"></span>excluded</span></p>";
  o << "<table><tr><th>class</th><th class=\"num\">images</th><th class=\"num\">train</th><th class=\"num\">val</th>"
       "<th class=\"num\">test</th><th style=\"width:40%\">share of the largest class</th></tr>";
  size_t shown = 0;
  for (const auto& c : cl) {
    if (shown++ == kMaxRows) break;
    uint64_t n = c.value("count", uint64_t{0});
    const json& s = object_at(c, "splits");
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
  // The class map this run applied (--class-alias, --exclude-class, the policy).
  const json& map = object_at(report, "class_mapping");
  const json& aliases = array_at(map, "aliases");
  const json& left = array_at(map, "excluded");
  if (!aliases.empty() || !left.empty()) {
    o << "<table><tr><th>class as read</th><th>counted as</th><th class=\"num\">images</th></tr>";
    for (const auto& a : aliases)
      o << "<tr><td class=\"path\">" << esc(a.value("from", json(""))) << "</td><td class=\"path\">"
        << esc(a.value("to", json(""))) << "</td><td class=\"num\">" << a.value("images", uint64_t{0}) << "</td></tr>";
    for (const auto& e : left)
      o << "<tr><td class=\"path\">" << esc(e.value("label", json(""))) << "</td><td>left out</td><td class=\"num\">"
        << e.value("images", uint64_t{0}) << "</td></tr>";
    o << "</table>";
  }
  o << "</section>\n";
}

void storage(std::ostringstream& o, const json& report) {
  o << "<section id=\"storage\"><h2>Formats and colour modes</h2><table><tr><th>format</th><th class=\"num\">images</th></tr>";
  const json& formats = object_at(report, "formats");
  const json& modes = object_at(report, "modes");
  for (const auto& [k, v] : formats.items())
    o << "<tr><td>" << html_escape(k) << "</td><td class=\"num\">" << esc(v) << "</td></tr>";
  o << "</table><br><table><tr><th>mode / bits per sample</th><th class=\"num\">images</th></tr>";
  for (const auto& [k, v] : modes.items())
    o << "<tr><td>" << html_escape(k) << "</td><td class=\"num\">" << esc(v) << "</td></tr>";
  o << "</table></section>\n";
}

std::string join_labels(const json& g) {
  std::string out;
  for (const auto& l : array_at(g, "labels")) out += (out.empty() ? "" : ", ") + str(l);
  return out;
}

// The class a path belongs to, for the findings filter (display only).
std::string class_of_path(const std::string& p, bool pre_split) {
  size_t a = p.find('/');
  if (a == std::string::npos) return "";
  if (!pre_split) return p.substr(0, a);
  size_t b = p.find('/', a + 1);
  return b == std::string::npos ? "" : p.substr(a + 1, b - a - 1);
}

void findings(std::ostringstream& o, const json& report, const std::vector<Finding>* finding_list, const Thumbnails& thumbs) {
  const json& fs = array_at(report, "findings");
  const bool pre_split = object_at(report, "layout").value("pre_split", false);
  o << "<section id=\"findings\"><h2>Findings</h2>";
  if (fs.empty()) {
    o << "<p class=\"note\">Nothing to report.</p></section>\n";
    return;
  }
  std::set<std::string> codes, classes;
  for (const auto& f : fs) codes.insert(str(f.value("code", json(""))));
  for (const auto& c : array_at(report, "classes")) classes.insert(str(c.value("label", json(""))));
  o << "<div class=\"filters\"><label>severity <select id=\"f-sev\"><option value=\"\">all</option>"
       "<option>error</option><option>warning</option><option>info</option></select></label>"
       "<label>code <select id=\"f-code\"><option value=\"\">all</option>";
  for (const auto& c : codes) o << "<option>" << html_escape(c) << "</option>";
  o << "</select></label><label>class <select id=\"f-class\"><option value=\"\">all</option>";
  for (const auto& c : classes) o << "<option>" << html_escape(c) << "</option>";
  o << "</select></label><span class=\"note\" id=\"f-count\"></span></div>";
  // A finding's paths: from the findings themselves when given (the report then
  // holds none), else from the JSON, copied into `buffer`.
  auto listed = [&](size_t row) -> const std::vector<std::string>* {
    return finding_list && row < finding_list->size() && !fs[row].contains("paths") ? &(*finding_list)[row].paths : nullptr;
  };
  auto paths_of = [&](size_t row, std::vector<std::string>& buffer) -> const std::vector<std::string>& {
    if (const auto* list = listed(row)) return *list;
    buffer.clear();
    for (const auto& p : array_at(fs[row], "paths")) buffer.push_back(str(p));
    return buffer;
  };
  auto rank_of = [](const std::string& sev) { return sev == "error" ? 0 : sev == "warning" ? 1 : 2; };
  // Each code once, errors first: how many findings and files; a click shows all of that code.
  struct Tally {
    int rank = 2;
    std::string severity;
    size_t findings = 0, files = 0;
  };
  std::map<std::string, Tally> tally;
  for (size_t row = 0; row < fs.size(); ++row) {
    const json& f = fs[row];
    Tally& t = tally[str(f.value("code", json("")))];
    t.severity = str(f.value("severity", json("info")));
    t.rank = std::min(t.rank, rank_of(t.severity));
    ++t.findings;
    t.files += listed(row) ? listed(row)->size() : array_at(f, "paths").size();
  }
  std::vector<std::pair<std::string, Tally>> by_code(tally.begin(), tally.end());
  std::stable_sort(by_code.begin(), by_code.end(), [](const auto& a, const auto& b) { return a.second.rank < b.second.rank; });
  o << "<div class=\"bycode\">";
  for (const auto& [code, t] : by_code) {
    o << "<a data-code=\"" << html_escape(code) << "\"><span class=\"sev " << html_escape(t.severity)
      << "\">" << t.findings << "</span> <code class=\"code\">" << html_escape(code) << "</code>";
    if (t.files) o << " <span class=\"note\">" << t.files << (t.files == 1 ? " file" : " files") << "</span>";
    o << "</a>";
  }
  o << "</div>";
  o << "<table id=\"findings-table\"><thead><tr><th data-sort=\"0\">severity</th><th data-sort=\"1\">code</th>"
       "<th>what</th><th data-sort=\"3\" style=\"width:38%\">files</th></tr></thead><tbody>";
  size_t shown = 0;
  std::vector<std::string> from_json;
  for (const auto& f : fs) {
    if (shown == kMaxRows) break;
    const size_t row = shown++;
    std::string sev = str(f.value("severity", json("info")));
    const std::vector<std::string>& paths = paths_of(row, from_json);
    std::set<std::string> row_classes;
    for (const auto& p : paths) {
      std::string c = class_of_path(p, pre_split);
      if (!c.empty()) row_classes.insert(c);
    }
    const json& details = object_at(f, "details");
    if (details.contains("label") && details["label"].is_string()) row_classes.insert(details["label"].get<std::string>());
    if (details.contains("labels") && details["labels"].is_array())
      for (const auto& l : details["labels"]) if (l.is_string()) row_classes.insert(l.get<std::string>());
    std::string cls_attr;
    for (const auto& c : row_classes) cls_attr += "\x1f" + c;
    const int rank = rank_of(sev);
    o << "<tr data-sev=\"" << html_escape(sev) << "\" data-code=\"" << esc(f.value("code", json(""))) << "\" data-classes=\""
      << html_escape(cls_attr + "\x1f") << "\" data-k0=\"" << rank << "\" data-k3=\"" << paths.size() << "\">"
      << "<td><span class=\"sev " << html_escape(sev) << "\">" << html_escape(sev) << "</span>";
    if (f.contains("baseline")) o << " <span class=\"note\">" << esc(f["baseline"]) << "</span>";
    if (f.contains("accepted")) o << " <span class=\"note\">accepted: " << esc(f["accepted"]) << "</span>";
    o << "</td><td><code class=\"code\">" << esc(f.value("code", json(""))) << "</code></td><td>"
      << esc(f.value("message", json(""))) << "</td><td>";
    // Four paths shown, up to 100 more folded, the rest in report.json / manifest.csv.
    constexpr size_t kOpen = 4, kFolded = 100;
    for (size_t k = 0; k < paths.size() && k < kOpen + kFolded; ++k) {
      if (k == kOpen)
        o << "<details><summary>" << paths.size() - kOpen << " more</summary>";
      o << "<div class=\"path\">" << html_escape(paths[k]) << "</div>";
    }
    if (paths.size() > kOpen + kFolded)
      o << "<div class=\"note\">… and " << paths.size() - kOpen - kFolded << " more (report.json)</div>";
    if (paths.size() > kOpen) o << "</details>";
    // Pictures of the first images a quality finding names (one such finding a code).
    const auto pictures = thumbs.find("#flag:" + str(f.value("code", json(""))));
    if (pictures != thumbs.end() && !pictures->second.empty()) {
      o << "<div class=\"strip mini\">";
      for (const auto& [path, uri] : pictures->second)
        o << "<img alt=\"\" tabindex=\"0\" width=\"128\" height=\"128\" title=\"" << html_escape(path) << "\" src=\"" << uri << "\">";
      o << "</div>";
    }
    o << "</td></tr>";
  }
  o << "</tbody></table>";
  if (fs.size() > kMaxRows) o << "<p class=\"note\">First " << kMaxRows << " of " << fs.size() << " findings.</p>";
  o << "</section>\n";
}

void sizes(std::ostringstream& o, const json& report) {
  const json& sz = array_at(report, "sizes");
  if (sz.empty()) return;
  if (sz.size() == 1) {  // no chart for a set of one size
    o << "<section id=\"sizes\"><h2>Image sizes</h2><p>All " << esc(sz[0].value("count", json(0))) << " images are "
      << esc(sz[0].value("width", json(0))) << " x " << esc(sz[0].value("height", json(0))) << " px.</p></section>\n";
    return;
  }
  // Log-log scatter of stored width x height; circle area grows with the count.
  double max_side = 16;
  uint64_t max_count = 1;
  for (const auto& e : sz) {
    max_side = std::max({max_side, e.value("width", 1.0), e.value("height", 1.0)});
    max_count = std::max(max_count, e.value("count", uint64_t{1}));
  }
  const double hi = std::log10(max_side * 1.5);
  const int W = 520, H = 360, L = 56, B = 40;
  auto px = [&](double v) { return L + std::log10(std::max(v, 1.0)) / hi * (W - L - 12); };
  auto py = [&](double v) { return H - B - std::log10(std::max(v, 1.0)) / hi * (H - B - 12); };
  o << "<section id=\"sizes\"><h2>Image sizes</h2><svg width=\"" << W << "\" height=\"" << H
    << "\" viewBox=\"0 0 " << W << " " << H << "\" role=\"img\" aria-label=\"width by height\">";
  o << "<rect x=\"" << L << "\" y=\"12\" width=\"" << W - L - 12 << "\" height=\"" << H - B - 12
    << "\" fill=\"#fbf7f0\" stroke=\"#d9cfbf\"/>";
  for (double t : {10.0, 100.0, 1000.0, 10000.0}) {
    if (t > max_side * 1.5) break;
    o << "<line x1=\"" << px(t) << "\" y1=\"12\" x2=\"" << px(t) << "\" y2=\"" << H - B << "\" stroke=\"#e6dccb\"/>"
      << "<text x=\"" << px(t) << "\" y=\"" << H - B + 16 << "\" font-size=\"11\" text-anchor=\"middle\">" << t << "</text>"
      << "<line x1=\"" << L << "\" y1=\"" << py(t) << "\" x2=\"" << W - 12 << "\" y2=\"" << py(t) << "\" stroke=\"#e6dccb\"/>"
      << "<text x=\"" << L - 6 << "\" y=\"" << py(t) + 4 << "\" font-size=\"11\" text-anchor=\"end\">" << t << "</text>";
  }
  o << "<text x=\"" << (W + L) / 2 << "\" y=\"" << H - 6 << "\" font-size=\"12\" text-anchor=\"middle\">width (px)</text>"
    << "<text x=\"14\" y=\"" << (H - B) / 2 << "\" font-size=\"12\" transform=\"rotate(-90 14 " << (H - B) / 2
    << ")\" text-anchor=\"middle\">height (px)</text>";
  for (const auto& e : sz) {
    double w = e.value("width", 1.0), h = e.value("height", 1.0);
    uint64_t n = e.value("count", uint64_t{1});
    double r = 2.5 + 14.0 * std::sqrt(double(n) / double(max_count));
    o << "<circle cx=\"" << px(w) << "\" cy=\"" << py(h) << "\" r=\"" << r
      << "\" fill=\"#0f4c5c\" fill-opacity=\"0.45\"><title>" << w << " x " << h << ": " << n << "</title></circle>";
  }
  o << "</svg><table class=\"narrow\"><tr><th>most common sizes</th><th class=\"num\">images</th></tr>";
  size_t k = 0;
  for (const auto& e : sz) {
    if (k++ == 8) break;
    o << "<tr><td>" << esc(e.value("width", json(0))) << " x " << esc(e.value("height", json(0)))
      << "</td><td class=\"num\">" << esc(e.value("count", json(0))) << "</td></tr>";
  }
  o << "</table></section>\n";
}

void mask_pairs(std::ostringstream& o, const json& report, const Thumbnails& thumbs) {
  const json& m = object_at(report, "masks");
  const json& pairs = array_at(m, "pairs");
  if (pairs.empty()) return;
  o << "<section id=\"masks\"><h2>Masks and their images</h2><p class=\"note\">" << pairs.size()
    << " images have a mask or annotation twin; masks are not counted as images or classes.</p><table class=\"narrow\">"
       "<tr><th>class</th><th class=\"num\">pairs</th></tr>";
  for (const auto& c : array_at(m, "pairs_per_class"))
    o << "<tr><td class=\"path\">" << esc(c.value("label", json(""))) << "</td><td class=\"num\">"
      << esc(c.value("pairs", json(0))) << "</td></tr>";
  o << "</table><table class=\"narrow\"><tr><th>folder</th><th>beside</th><th>layout</th><th class=\"num\">pairs</th>"
       "<th class=\"num\">confirmed</th><th>masks?</th></tr>";
  size_t k = 0;
  for (const auto& e : array_at(m, "folders")) {
    if (k++ == 50) break;
    o << "<tr><td class=\"path\">" << esc(e.value("folder", json(""))) << "</td><td class=\"path\">"
      << esc(e.value("partner", json(""))) << "</td><td>" << esc(e.value("layout", json(""))) << "</td><td class=\"num\">"
      << esc(e.value("pairs", json(0))) << "</td><td class=\"num\">" << esc(e.value("confirmed", json(0)))
      << "</td><td>" << (e.value("accepted", false) ? "yes" : "no") << " (" << esc(e.value("decided_by", json(""))) << ")</td></tr>";
  }
  o << "</table>";
  auto it = thumbs.find("#masks");
  if (it != thumbs.end()) {
    o << "<div class=\"strip\">";
    for (const auto& [path, uri] : it->second)
      o << "<figure><img alt=\"\" tabindex=\"0\" width=\"160\" height=\"160\" src=\"" << uri << "\"><figcaption class=\"path\">"
        << html_escape(path) << "</figcaption></figure>";
    o << "</div><p class=\"note\">Each image with its mask drawn over it in ochre, then the mask (from the files, or their"
         " 32x32 thumbnails when a file cannot be read now; click a picture to enlarge it).</p>";
  }
  o << "</section>\n";
}

void groups(std::ostringstream& o, const json& report, const Thumbnails& thumbs) {
  const json& gs = array_at(report, "groups");
  if (gs.empty()) return;
  o << "<section id=\"groups\"><h2>Copies and look-alikes</h2><p class=\"note\">" << gs.size()
    << " groups; each strip shows the first images of a group (from the files, or their 32x32 look-alike thumbnails"
       " when a file cannot be read now; click a picture to enlarge it) with their paths, and how each pair was"
       " matched.</p>";
  size_t shown = 0;
  for (const auto& g : gs) {
    if (shown++ == 60) {
      o << "<p class=\"note\">First 60 of " << gs.size() << " groups (all in report.json).</p>";
      break;
    }
    std::string id = str(g.value("id", json("")));
    o << "<div class=\"group\"><div class=\"gh\"><b>" << html_escape(id) << "</b> " << esc(g.value("kind", json("")))
      << " · " << array_at(g, "paths").size() << " images · " << html_escape(join_labels(g)) << "</div><div class=\"strip\">";
    auto it = thumbs.find(id);
    size_t k = 0;
    for (const auto& p : array_at(g, "paths")) {
      if (k++ == 8) break;
      std::string path = str(p);
      std::string uri;
      if (it != thumbs.end())
        for (const auto& [tp, data] : it->second)
          if (tp == path) uri = data;
      o << "<figure>";
      if (!uri.empty()) o << "<img alt=\"\" tabindex=\"0\" width=\"160\" height=\"160\" src=\"" << uri << "\">";
      else o << "<div class=\"nothumb\"></div>";
      o << "<figcaption class=\"path\">" << html_escape(path) << "</figcaption></figure>";
    }
    o << "</div>";
    // How the pairs that joined the group matched (report.json "links"), the first eight.
    size_t l = 0;
    for (const auto& link : array_at(g, "links")) {
      if (l++ == 8) break;
      o << "<div class=\"note\"><span class=\"path\">" << esc(link.value("a", json(""))) << "</span> and <span class=\"path\">"
        << esc(link.value("b", json(""))) << "</span>: ";
      if (str(link.value("how", json(""))) == "identical") {
        o << "byte-identical";
      } else {
        const std::string turn = str(link.value("turn", json("none")));
        char corr[32];
        std::snprintf(corr, sizeof corr, "%.4f", link.value("correlation", 0.0));
        o << (turn == "none" ? std::string("as they are") : "the first " + html_escape(turn)) << ", correlation " << corr;
        const std::string blurred = str(link.value("blurred", json("none")));
        if (blurred != "none") {
          char sigma[32];
          std::snprintf(sigma, sizeof sigma, "%.2f", link.value("blur_sigma", 0.0));
          o << " after blurring " << html_escape(blurred) << " by " << sigma << " thumbnail px";
        }
        const std::string fit = str(link.value("fit_source", json("none")));
        if (fit != "none") o << " through a tone-and-colour fit of " << html_escape(fit);
        if (link.value("resampled", false)) o << ", the larger picture brought to the smaller one's size";
        if (const int q = link.value("jpeg_quality", 0); q > 0) o << ", the other picture re-encoded as a JPEG of quality " << q;
      }
      o << "</div>";
    }
    o << "</div>";
  }
  o << "</section>\n";
}

void ignored(std::ostringstream& o, const json& report) {
  const json& ig = array_at(report, "ignored");
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

// The filter and sort script. Its SHA-256 is in the page's Content-Security-Policy,
// so it is the only script the browser will run (tests/report/report_html_test.py checks
// the hash with hashlib). Edit both together.
const char* kScriptHash = "sha256-Z6ZuixG88IWIjNjmg0rL/sMkbfPhWNEHPyQbD5C5wOA=";
const char* kScript = R"JS(
(function(){var t=document.getElementById('findings-table');document.body.setAttribute('data-ready','1');if(!t)return;
var rows=[].slice.call(t.tBodies[0].rows),s=document.getElementById('f-sev'),c=document.getElementById('f-code'),
k=document.getElementById('f-class'),n=document.getElementById('f-count');
function apply(){var v=0,per={},cut=0;rows.forEach(function(r){var ok=(!s.value||r.dataset.sev===s.value)&&(!c.value||r.dataset.code===c.value)
&&(!k.value||r.dataset.classes.indexOf('\x1f'+k.value+'\x1f')>=0);if(ok&&!c.value){per[r.dataset.code]=(per[r.dataset.code]||0)+1;
if(per[r.dataset.code]>5){ok=false;cut++;}}r.style.display=ok?'':'none';if(ok)v++;});
n.textContent=v+' of '+rows.length+' shown'+(cut?' (five a code; choose a code to see all of its findings)':'');}
[s,c,k].forEach(function(e){e.addEventListener('change',apply);});
[].slice.call(document.querySelectorAll('.bycode a')).forEach(function(a){a.addEventListener('click',function(){
c.value=a.dataset.code;apply();});});
[].slice.call(t.tHead.rows[0].cells).forEach(function(h){var col=h.dataset.sort;if(col===undefined)return;var up=true;
h.style.cursor='pointer';h.addEventListener('click',function(){rows.sort(function(a,b){var x=a.dataset['k'+col],y=b.dataset['k'+col];
if(x===undefined){x=a.cells[col].textContent;y=b.cells[col].textContent;return up?x.localeCompare(y):y.localeCompare(x);}
return up?x-y:y-x;});up=!up;rows.forEach(function(r){t.tBodies[0].appendChild(r);});});});apply();})();
)JS";

std::string render_html(const json& report, const Thumbnails& thumbs, const std::vector<Finding>* finding_paths) {
  std::ostringstream o;
  const json& tool = object_at(report, "tool");
  o << "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
       "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'; img-src data:; script-src '"
    << kScriptHash << "'\">"
       "<meta name=\"viewport\" content=\"width=device-width,initial-scale=1\"><title>tamis audit</title><style>"
    << kStyle << "</style></head><body>\n<header><h1>tamis audit of <span class=\"path\">"
    << esc(object_at(report, "root").value("path", json(""))) << "</span></h1><p>";
  const json& st = object_at(report, "settings");
  const json& sp = object_at(st, "split");
  o << esc(tool.value("name", json("tamis"))) << " " << esc(tool.value("version", json(""))) << " · split "
    << esc(sp.value("train", json(0))) << "/" << esc(sp.value("val", json(0))) << "/" << esc(sp.value("test", json(0)))
    << " (" << esc(st.value("split_method", json(""))) << ", seed " << esc(st.value("seed", json(1))) << ")"
    << " · look-alikes within " << esc(st.value("lookalike_radius", json(0))) << " bits, correlation "
    << esc(st.value("lookalike_min_correlation", json(0))) << " · smallest side " << esc(st.value("min_side", json(0)))
    << " px, smallest class " << esc(st.value("min_class", json(0))) << ", imbalance limit "
    << esc(st.value("max_imbalance", json(0))) << "</p></header><main>\n";
  tiles(o, object_at(report, "totals"));
  findings(o, report, finding_paths, thumbs);
  classes(o, report);
  groups(o, report, thumbs);
  mask_pairs(o, report, thumbs);
  sizes(o, report);
  storage(o, report);
  ignored(o, report);
  o << "</main><script>" << kScript << "</script></body></html>\n";
  return o.str();
}

}  // namespace tamis
