// tamis: the command line. Parses options and wires the stages; holds no logic
// of its own beyond turning outcomes into exit statuses (docs/cli.md):
//   0 nothing breaks the policy, 1 a finding breaks it, 2 bad command line,
//   3 the run could not be done.
#include <algorithm>
#include <charconv>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <map>
#include <string>
#include <string_view>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "progress.h"
#include "tamis/base/atomic_file.h"
#include "tamis/base/errors.h"
#include "tamis/demo/demo.h"
#include "tamis/pipeline/audit.h"
#include "tamis/pipeline/scale_out.h"
#include "tamis/place/leave_out.h"
#include "tamis/place/manifest_reader.h"
#include "tamis/read/cache.h"
#include "tamis/report/export_tree.h"
#include "tamis/report/index_file.h"
#include "tamis/report/outputs.h"
#include "tamis/version.h"

namespace {

// Text from the data set (names of files and folders, in messages) shown on a
// terminal: control characters (C0, DEL) are written as \xNN, so that a name
// cannot move the cursor, change colours or forge lines.
std::string safe(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (unsigned char c : text) {
    if (c < 0x20 || c == 0x7f) {
      char buf[5];
      std::snprintf(buf, sizeof buf, "\\x%02x", c);
      out += buf;
    } else {
      out += static_cast<char>(c);
    }
  }
  return out;
}

// An error as the user reads it: "tamis: " and a plain sentence (base/errors.h).
void say(const std::exception& e) { std::fprintf(stderr, "tamis: %s\n", safe(tamis::plain_message(e)).c_str()); }

// Help that a person can act on: each option's value is named by what it is
// (DIR, FILE, N, K/N, a list of choices), never by the parser's type and range
// ("UINT:UINT in [0 - 1024]"); a required option says so in words.
class HelpFormatter : public CLI::Formatter {
 public:
  std::string make_option_opts(const CLI::Option* opt) const override {
    if (opt->get_positional() || opt->get_items_expected_max() == 0) return {};
    std::string text = " " + value_name(opt);
    if (opt->get_expected_max() == CLI::detail::expected_max_vector_size) text += " ...";
    if (opt->get_required()) text += " (required)";
    return text;
  }

 private:
  static std::string value_name(const CLI::Option* opt) {
    if (!opt->get_option_text().empty()) return opt->get_option_text();
    static const std::map<std::string, std::string> kNames = {
        {"--seed", "N"}, {"--split", "TRAIN/VAL/TEST"}, {"--keep", "MANIFEST"}, {"--per-class", "N"},
        {"--folds", "K"}, {"--exclude-flagged", "CODES"}, {"--class-alias", "VARIANT=CLASS"},
        {"--exclude-class", "NAME"}, {"--policy", "FILE"}, {"--baseline", "REPORT"}, {"--junit", "FILE"},
        {"--format", "text|json"}, {"--thumbnails-kb", "KB"}, {"--threads", "N"}, {"--mask-folder", "FOLDER"},
        {"--not-mask-folder", "FOLDER"}, {"--cache", "FILE"}, {"--max-pixels", "N"}, {"--image-memory-mb", "MB"},
        {"--thumbnail-memory-mb", "MB"}, {"--join-memory-mb", "MB"}, {"--shard", "K/N"}, {"--shards", "N"},
        {"--slice", "K/N"}, {"--slices", "N"}, {"--to", "TREE"}, {"--mode", "symlink|hardlink|copy"},
        {"--out", "DIR"}};
    const auto it = kNames.find(opt->get_name());
    return it != kNames.end() ? it->second : "VALUE";
  }
};

// A command-line mistake as a plain sentence ("tamis: ..."), without CLI11's
// "Run with --help" (the caller names the help to read).
std::string usage_message(const CLI::ParseError& e) {
  std::string text = e.what();
  if (text == "A subcommand is required") return "a command is required: audit, split, export, scan, join, merge or demo";
  if (!text.empty() && text[0] >= 'A' && text[0] <= 'Z' && text.size() > 1 && text[1] >= 'a' && text[1] <= 'z')
    text[0] = static_cast<char>(text[0] - 'A' + 'a');
  // A check's failure: "--threads: Value 5000 not in range 0 to 1024".
  if (const size_t v = text.find(": Value "); v != std::string::npos) text.replace(v, 8, ": ");
  if (const size_t v = text.find(" not in range "); v != std::string::npos) text.replace(v, 14, " is not within ");
  return text;
}

constexpr int kExitBadUsage = 2;
constexpr int kExitCannotRun = 3;

struct CommonOptions {
  std::vector<std::string> mask_folders, not_mask_folders;
  unsigned threads = 0;
  std::string cache;
  bool no_cache = false;
  bool quiet = false;
  bool progress = false;
  bool no_progress = false;
  bool timings = false;
  uint64_t max_pixels = tamis::DecodeLimits{}.max_pixels;
  uint64_t image_memory_mb = tamis::DecodeLimits{}.max_image_bytes >> 20;
  uint64_t thumbnail_memory_mb = tamis::ReadOptions{}.thumbnail_memory_bytes >> 20;
};

// The progress the options ask for: shown when stderr is a terminal or with
// --progress, never with --quiet or --no-progress (progress.h).
tamis::cli::ProgressLine progress_for(const CommonOptions& o) {
  const bool terminal = tamis::cli::ProgressLine::stderr_is_terminal();
  return tamis::cli::ProgressLine(!o.quiet && !o.no_progress && (o.progress || terminal), terminal);
}

void add_mask_options(CLI::App* cmd, CommonOptions& o) {
  cmd->add_option("--mask-folder", o.mask_folders, "a folder (relative to ROOT) that holds masks, whatever its pixels say");
  cmd->add_option("--not-mask-folder", o.not_mask_folders, "a folder (relative to ROOT) that never holds masks");
}

void add_reading_options(CLI::App* cmd, CommonOptions& o, bool masks = true) {
  cmd->add_option("--threads", o.threads, "worker threads (default: all cores)")->check(CLI::Range(0u, 1024u));
  if (masks) add_mask_options(cmd, o);
  cmd->add_option("--cache", o.cache, "record cache file (default: $XDG_CACHE_HOME/tamis/records.sqlite; never inside ROOT)");
  cmd->add_flag("--no-cache", o.no_cache, "do not read or write a cache");
  cmd->add_flag("--quiet", o.quiet, "print nothing but errors");
  cmd->add_flag("--progress", o.progress, "show a progress line on stderr even when it is not a terminal");
  cmd->add_flag("--no-progress", o.no_progress, "never show a progress line");
  cmd->add_flag("--timings", o.timings, "print each stage's wall time on stderr when done");
  cmd->add_option("--max-pixels", o.max_pixels, "refuse images whose header claims more pixels (default 200000000)")
      ->check(CLI::Range(uint64_t{1}, uint64_t{1} << 40));
  cmd->add_option("--image-memory-mb", o.image_memory_mb,
                  "memory one image's decode may hold, in MB (default 1024); larger images are reported, not read")
      ->check(CLI::Range(uint64_t{16}, uint64_t{1} << 24));
  cmd->add_option("--thumbnail-memory-mb", o.thumbnail_memory_mb,
                  "memory the look-alike thumbnails may take, in MB (default 64); beyond it they go to an unnamed "
                  "scratch file in $TMPDIR (or /tmp); 0: always")
      ->check(CLI::Range(uint64_t{0}, uint64_t{1} << 24));
}

// Options of the judging stages, shared by `audit` and `split`.
struct JudgeOptions {
  std::string policy, baseline, junit, format = "text";
  size_t thumbnails_kb = tamis::kThumbnailBudget / 1024;
};

void add_judge_options(CLI::App* cmd, JudgeOptions& o) {
  cmd->add_option("--policy", o.policy, "policy file (JSON): severities per finding code and thresholds");
  cmd->add_option("--baseline", o.baseline, "an earlier report.json: report what changed; with fail_on \"new\" fail only on new findings");
  cmd->add_option("--junit", o.junit, "also write the checks as JUnit XML to FILE");
  cmd->add_option("--format", o.format, "summary on stdout: text or json")->check(CLI::IsMember({"text", "json"}));
  cmd->add_option("--thumbnails-kb", o.thumbnails_kb, "picture data report.html may embed, in KB (default 1024; 0: none)")
      ->check(CLI::Range(size_t{0}, size_t{1} << 20));
}

// Loads the policy and baseline; prints and returns false when either is bad.
bool resolve_judge(const JudgeOptions& o, tamis::Policy& policy, tamis::Baseline& baseline, bool& have_baseline) {
  try {
    policy = o.policy.empty() ? tamis::default_policy() : tamis::load_policy(o.policy);
  } catch (const tamis::PolicyError& e) {
    std::fprintf(stderr, "tamis: %s (%s)\n", safe(tamis::plain_message(e)).c_str(), o.policy.c_str());
    return false;
  }
  have_baseline = !o.baseline.empty();
  if (have_baseline) {
    try {
      baseline = tamis::load_baseline(o.baseline);
    } catch (const std::exception& e) {
      say(e);
      return false;
    }
  }
  return true;
}

// Options that decide the split: shared by `audit` and `split`.
struct SplitOptions {
  std::string spec = "70/15/15";
  uint64_t seed = 1;
  bool stable = false;
  std::string keep;
  uint64_t per_class = 0;
  uint32_t folds = 0;
  bool resplit = false;
  std::vector<std::string> exclude_flagged;
  bool one_per_group = false;
  std::vector<std::string> class_aliases, exclude_classes;
};

void add_split_options(CLI::App* cmd, SplitOptions& o) {
  // A seed is a plain decimal 0..2^64-1: a sign or an overflow is refused, never
  // wrapped (CLI11 alone would read -1 as 2^64-1).
  const CLI::Validator plain_u64(
      [](std::string& text) -> std::string {
        uint64_t v = 0;
        const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), v);
        if (text.empty() || text[0] == '+' || ec != std::errc() || end != text.data() + text.size())
          return "takes a whole number from 0 to 18446744073709551615, not '" + text + "'";
        return {};
      },
      "0..2^64-1");
  cmd->add_option("--seed", o.seed, "seed of the split (default 1)")->check(plain_u64);
  cmd->add_option("--split", o.spec, "train/val/test percentages, or train/test (default 70/15/15)");
  cmd->add_flag("--stable", o.stable, "decide each group's split by a keyed hash, so added files never move others");
  cmd->add_option("--keep", o.keep, "a previous manifest.csv: keep its splits, place only new files");
  cmd->add_option("--per-class", o.per_class, "at most N images a class (whole groups), the rest excluded");
  cmd->add_option("--folds", o.folds, "deal train+val into K folds (stratified, groups whole): a fold column")
      ->check(CLI::Range(2u, 1000u));
  cmd->add_flag("--resplit", o.resplit, "in a tree already split into train/val/test folders, draw a new split");
  cmd->add_option("--exclude-flagged", o.exclude_flagged,
                  "leave out of the split the images that findings of these codes name (comma-separated; "
                  "e.g. label-conflict,mask-size-mismatch); the manifest's exclusion column says why")
      ->delimiter(',');
  cmd->add_flag("--one-per-group", o.one_per_group,
                "keep one image of each look-alike group in the split (the most pixels, then the first path)");
  cmd->add_option("--class-alias", o.class_aliases,
                  "VARIANT=CLASS: count the images of class VARIANT as CLASS (repeatable; the data set is not touched)");
  cmd->add_option("--exclude-class", o.exclude_classes, "leave the class NAME out of the checks and the split (repeatable)");
}

// The split's leave-out settings: the command line's and the policy's together.
bool resolve_leave_out(const SplitOptions& o, const tamis::Policy& policy, tamis::SplitSettings& s) {
  for (const std::string& code : o.exclude_flagged)
    if (!tamis::excludable_code(code)) {
      std::fprintf(stderr, "tamis: --exclude-flagged '%s' is not a finding code that names images before the split (docs/findings.md)\n",
                   safe(code).c_str());
      return false;
    }
  s.exclude_flagged = policy.exclude_flagged;
  s.exclude_flagged.insert(s.exclude_flagged.end(), o.exclude_flagged.begin(), o.exclude_flagged.end());
  std::sort(s.exclude_flagged.begin(), s.exclude_flagged.end());
  s.exclude_flagged.erase(std::unique(s.exclude_flagged.begin(), s.exclude_flagged.end()), s.exclude_flagged.end());
  s.one_per_group = o.one_per_group || policy.one_per_group;
  return true;
}

// The class map: the policy's, then the command line's (which wins for a variant
// both name); printed and false when it is not valid.
bool resolve_classes(const SplitOptions& o, const tamis::Policy& policy, tamis::ClassMap& map) {
  map = policy.classes;
  for (const std::string& a : o.class_aliases) {
    const size_t eq = a.find('=');
    if (eq == std::string::npos) {
      std::fprintf(stderr, "tamis: --class-alias '%s' must be VARIANT=CLASS\n", safe(a).c_str());
      return false;
    }
    map.aliases[a.substr(0, eq)] = a.substr(eq + 1);
  }
  map.excluded.insert(o.exclude_classes.begin(), o.exclude_classes.end());
  try {
    tamis::validate_class_map(map);
  } catch (const std::invalid_argument& e) {
    say(e);
    return false;
  }
  return true;
}

// Turns the options into settings and the keep map; prints and returns false when bad.
bool resolve_split(const SplitOptions& o, tamis::SplitSettings& s, tamis::KeepMap& keep, bool& have_keep) {
  try {
    s.percent = tamis::parse_split_spec(o.spec);
  } catch (const std::invalid_argument& e) {
    say(e);
    return false;
  }
  s.seed = o.seed;
  s.method = o.stable ? tamis::SplitMethod::stable : tamis::SplitMethod::shuffle;
  s.per_class = o.per_class;
  s.folds = o.folds;
  s.resplit = o.resplit;
  have_keep = !o.keep.empty();
  if (have_keep) {
    std::ifstream is(o.keep, std::ios::binary);
    if (!is) {
      std::fprintf(stderr, "tamis: --keep %s cannot be read\n", o.keep.c_str());
      return false;
    }
    try {
      keep = tamis::read_manifest_splits(is);
    } catch (const std::exception& e) {
      std::fprintf(stderr, "tamis: --keep %s: %s\n", o.keep.c_str(), safe(tamis::plain_message(e)).c_str());
      return false;
    }
  }
  return true;
}

// What a judging command (audit, split, merge) places with: the split, the
// policy, the keep map and the baseline (place.keep and place.baseline point
// into this object, which therefore stays where it was made).
struct Judging {
  tamis::PlaceOptions place;
  tamis::KeepMap keep;
  tamis::Baseline baseline;
  Judging() = default;
  Judging(const Judging&) = delete;
  Judging& operator=(const Judging&) = delete;
};

// The split, policy, leave-out and class options into `j`; prints and returns false when bad.
bool resolve_judging(const SplitOptions& so, const JudgeOptions& jo, Judging& j) {
  bool have_keep = false, have_baseline = false;
  if (!resolve_split(so, j.place.split, j.keep, have_keep)) return false;
  if (!resolve_judge(jo, j.place.policy, j.baseline, have_baseline)) return false;
  if (!resolve_leave_out(so, j.place.policy, j.place.split)) return false;
  if (!resolve_classes(so, j.place.policy, j.place.classes)) return false;
  j.place.keep = have_keep ? &j.keep : nullptr;
  j.place.baseline = have_baseline ? &j.baseline : nullptr;
  return true;
}

bool use_colour() {
  const char* no = std::getenv("NO_COLOR");
  return isatty(STDOUT_FILENO) == 1 && !(no && *no);
}

// "1 file", "2 files": a count with its noun, singular or plural.
std::string count_of(uint64_t n, const char* one, const char* many) {
  return std::to_string(n) + " " + (n == 1 ? one : many);
}

void print_summary(const tamis::AuditResult& r, const std::filesystem::path& out, const std::string& format) {
  const auto& t = r.totals;
  // Findings by code, errors first, then warnings and infos, each by code name:
  // (severity rank, code) -> findings, those breaking the policy, files they name.
  struct CodeCount {
    size_t findings = 0, breaking = 0, files = 0;
    bool all_images = false;  // a size rule every image meets (a finding of the set, naming no file)
  };
  std::map<std::pair<int, std::string>, CodeCount> by_code;
  size_t by_severity[3] = {0, 0, 0}, failing = 0;
  for (size_t k = 0; k < r.findings.size(); ++k) {
    const auto& f = r.findings[k];
    const int rank = f.severity == tamis::Severity::error ? 0 : f.severity == tamis::Severity::warning ? 1 : 2;
    const bool breaks =
        rank == 0 && tamis::breaks_policy(f.severity, r.known[k], r.fail_on_new_only, r.accepted_reason(k) != nullptr);
    auto& c = by_code[{rank, f.code}];
    ++c.findings;
    c.breaking += breaks;
    c.files += f.paths.size();
    c.all_images = c.all_images || f.details.value("all_images", false);
    ++by_severity[rank];
    failing += breaks;
  }
  const size_t errors = by_severity[0], warnings = by_severity[1], infos = by_severity[2];
  static const char* const kSeverityName[3] = {"error", "warning", "info"};
  if (format == "json") {
    nlohmann::json codes = nlohmann::json::array(), failing_codes = nlohmann::json::array();
    for (const auto& [key, n] : by_code) {
      codes.push_back({{"code", key.second}, {"severity", kSeverityName[key.first]}, {"findings", n.findings},
                       {"files", n.files}});
      if (n.breaking > 0) failing_codes.push_back(key.second);
    }
    nlohmann::json j = {{"files_seen", t.files_seen}, {"images", t.images}, {"masks", t.masks},
                        {"unreadable", t.unreadable}, {"ignored", t.ignored}, {"classes", r.labels.names.size()},
                        {"groups", r.groups.groups.size()}, {"errors", errors}, {"warnings", warnings}, {"infos", infos},
                        {"failing", failing}, {"failing_codes", failing_codes}, {"codes", codes},
                        {"exit_status", tamis::policy_exit_status(r)},
                        {"reports", (out / "report.html").string()},
                        {"read", r.counts.read}, {"cached", r.counts.cached}, {"cached_by_hash", r.counts.cached_by_hash},
                        {"moved_or_renamed", r.counts.moved}};
    if (r.baseline.present)
      j["baseline"] = {{"findings_new", r.baseline.findings_new}, {"findings_gone", r.baseline.findings_gone},
                       {"files_added", r.baseline.files_added.size()}, {"files_removed", r.baseline.files_removed.size()}};
    std::printf("%s\n", j.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace).c_str());
    return;
  }
  const bool c = use_colour();
  const char* red = c ? "\033[31;1m" : "";
  const char* amber = c ? "\033[33m" : "";
  const char* green = c ? "\033[32m" : "";
  const char* off = c ? "\033[0m" : "";
  std::printf("files seen %llu: %s, %s, %llu unreadable, %llu ignored; %s, %s\n", (unsigned long long)t.files_seen,
              count_of(t.images, "image", "images").c_str(), count_of(t.masks, "mask", "masks").c_str(),
              (unsigned long long)t.unreadable, (unsigned long long)t.ignored,
              count_of(r.labels.names.size(), "class", "classes").c_str(),
              count_of(r.groups.groups.size(), "group", "groups").c_str());
  std::printf("findings: %s%s%s, %s%s%s, %s\n", errors ? red : green, count_of(errors, "error", "errors").c_str(), off,
              warnings ? amber : "", count_of(warnings, "warning", "warnings").c_str(), warnings ? off : "",
              count_of(infos, "info", "infos").c_str());
  // Every code with its count, errors first; then the first error findings in full.
  for (const auto& [key, n] : by_code) {
    const tamis::FindingKind* kind = tamis::finding_kind(key.second);
    const char* colour = key.first == 0 ? red : key.first == 1 ? amber : "";
    const std::string counts = count_of(n.findings, "finding", "findings") +
                               (n.all_images ? ", all images"
                                : n.files > 0 ? ", " + count_of(n.files, "file", "files")
                                              : std::string());
    std::printf("  %s%-7s %-22s%s %-24s %s\n", colour, kSeverityName[key.first], key.second.c_str(), *colour ? off : "",
                counts.c_str(), kind ? std::string(kind->title).c_str() : "");
  }
  size_t shown = 0;
  for (size_t k = 0; k < r.findings.size() && shown < 8; ++k) {
    const auto& f = r.findings[k];
    if (f.severity != tamis::Severity::error) continue;
    if (shown++ == 0) {
      if (errors > 8) std::printf("the first 8 of %zu errors (all in report.json):\n", errors);
      else std::printf("%s:\n", errors == 1 ? "the error" : "the errors");
    }
    std::printf("  %s%s%s %s%s\n", red, f.code.c_str(), off, safe(f.message).c_str(),
                r.accepted_reason(k) ? (" (accepted: " + safe(*r.accepted_reason(k)) + ")").c_str()
                : r.baseline.present ? (r.known[k] ? " (known)" : " (new)")
                                     : "");
  }
  if (r.baseline.present)
    std::printf("against the baseline: %zu new, %zu gone findings; %s added, %zu removed\n",
                r.baseline.findings_new, r.baseline.findings_gone,
                count_of(r.baseline.files_added.size(), "file", "files").c_str(), r.baseline.files_removed.size());
  if (r.counts.read + r.counts.cached + r.counts.cached_by_hash > 0)
    std::printf("read %s, %llu from the cache (%llu of them by content), %llu moved or renamed\n",
                count_of(r.counts.read, "file", "files").c_str(),
                (unsigned long long)(r.counts.cached + r.counts.cached_by_hash),
                (unsigned long long)r.counts.cached_by_hash, (unsigned long long)r.counts.moved);
  std::printf("policy: %s%s%s\n", failing ? red : green,
              failing ? (count_of(failing, "error finding breaks", "error findings break") + " it").c_str() : "passes",
              off);
  std::printf("reports: %s\n", safe((out / "report.html").string()).c_str());
}

const auto process_start = std::chrono::steady_clock::now();

// Writes the outputs, the JUnit file when asked, and the summary; returns the exit status.
int finish(tamis::AuditResult& result, const std::string& out, const JudgeOptions& jo, bool quiet, bool timings) {
  try {
    tamis::write_outputs(out, result, jo.thumbnails_kb * 1024, timings ? &result.times : nullptr, jo.junit);
  } catch (const tamis::InsideRootError& e) {
    say(e);
    return kExitBadUsage;
  } catch (const std::exception& e) {
    say(e);
    return kExitCannotRun;
  }
  if (!quiet) print_summary(result, out, jo.format);
  if (timings) {
    double staged = 0;
    for (const auto& t : result.times)
      if (!t.overlapped) staged += t.seconds;
    double total = std::chrono::duration<double>(std::chrono::steady_clock::now() - process_start).count();
    for (const auto& t : result.times)  // pieces of a stage that ran at once are indented under it
      std::fprintf(stderr, "tamis: %s%-*s %8.3f s\n", t.overlapped ? "  " : "", t.overlapped ? 14 : 16, t.stage.c_str(),
                   t.seconds);
    std::fprintf(stderr, "tamis: %-16s %8.3f s\n", "other", total - staged);
    std::fprintf(stderr, "tamis: %-16s %8.3f s (since the process started)\n", "total", total);
  }
  return tamis::policy_exit_status(result);
}

// ROOT as the outputs record it: absolute (not resolved through links), so that
// manifest paths can be joined onto it from anywhere.
std::filesystem::path absolute_root(const std::string& root) {
  namespace fs = std::filesystem;
  std::error_code ec;
  fs::path abs = fs::absolute(fs::path(root), ec).lexically_normal();
  if (ec) abs = fs::path(root);
  if (abs.has_parent_path() && !abs.has_filename()) abs = abs.parent_path();  // "/a/b/" -> "/a/b"
  return abs;
}

// The mask folders and the reading options into `settings` (root, cache and
// groups are the caller's); prints and returns false when they are bad.
bool resolve_reading(const CommonOptions& o, tamis::TreeSettings& settings) {
  namespace fs = std::filesystem;
  // Mask folders name folders inside ROOT: relative, without "..".
  for (const auto* list : {&o.mask_folders, &o.not_mask_folders})
    for (const std::string& f : *list) {
      const fs::path p(f);
      const bool up = std::any_of(p.begin(), p.end(), [](const fs::path& part) { return part == ".."; });
      if (f.empty() || p.is_absolute() || up) {
        std::fprintf(stderr, "tamis: %s '%s' must name a folder inside ROOT, relative to it and without '..'\n",
                     list == &o.mask_folders ? "--mask-folder" : "--not-mask-folder", f.c_str());
        return false;
      }
    }
  settings.masks.force = o.mask_folders;
  settings.masks.forbid = o.not_mask_folders;
  settings.read.threads = o.threads;
  settings.read.decode.max_pixels = o.max_pixels;
  settings.read.decode.max_image_bytes = o.image_memory_mb << 20;
  settings.read.thumbnail_memory_bytes = o.thumbnail_memory_mb << 20;
  const char* tmpdir = std::getenv("TMPDIR");
  settings.read.scratch_dir = tmpdir && *tmpdir ? fs::path(tmpdir) : fs::path("/tmp");  // never used inside ROOT
  return true;
}

// The record cache the options name (none with --no-cache; the default one unless it lies inside ROOT).
void resolve_cache(const std::string& root, const CommonOptions& o, tamis::TreeSettings& settings) {
  if (o.no_cache) return;
  settings.cache_file = o.cache.empty() ? tamis::default_cache_file() : std::filesystem::path(o.cache);
  if (o.cache.empty() && tamis::path_is_inside(root, settings.cache_file)) settings.cache_file.clear();
}

// The policy's look-alike settings (the hash and screen radii and the match's
// thresholds), keeping the run's threads and memory budget.
void take_lookalike(tamis::GroupSettings& to, const tamis::GroupSettings& from) {
  to.radius = from.radius;
  to.screen_radius = from.screen_radius;
  to.match = from.match;
}

int run_audit_command(const std::string& root, const std::string& out, const SplitOptions& so,
                      const JudgeOptions& jo, const CommonOptions& o) {
  namespace fs = std::filesystem;
  tamis::TreeSettings settings;
  settings.root = absolute_root(root);
  Judging judging;
  if (!resolve_judging(so, jo, judging)) return kExitBadUsage;
  tamis::PlaceOptions& place = judging.place;
  take_lookalike(settings.groups, place.policy.lookalike);
  resolve_cache(root, o, settings);
  if (!resolve_reading(o, settings)) return kExitBadUsage;
  // Early, before a long read: the output layer checks again when it writes.
  try {
    tamis::refuse_inside_root(root, out, "--out");
    if (!jo.junit.empty()) tamis::refuse_inside_root(root, jo.junit, "--junit");
    if (!o.cache.empty()) tamis::refuse_inside_root(root, o.cache, "--cache");
  } catch (const tamis::InsideRootError& e) {
    say(e);
    return kExitBadUsage;
  }
  std::error_code ec;
  if (!fs::is_directory(root, ec)) {
    std::fprintf(stderr, "tamis: ROOT %s is not a readable folder\n", root.c_str());
    return kExitCannotRun;
  }
  tamis::cli::ProgressLine progress = progress_for(o);
  settings.read.on_progress = [&progress](size_t done, size_t total) { progress.update(done, total); };
  tamis::AuditResult result;
  try {
    result = tamis::place(tamis::read_tree(settings), place);
    progress.finish();
    if (!result.cache_note.empty() && !o.quiet) std::fprintf(stderr, "tamis: %s\n", safe(result.cache_note).c_str());
  } catch (const std::exception& e) {
    progress.finish();
    say(e);
    return kExitCannotRun;
  }
  return finish(result, out, jo, o.quiet, o.timings);
}

int run_split_command(const std::string& dir, const std::string& out, const SplitOptions& so, const JudgeOptions& jo,
                      bool quiet) {
  Judging judging;
  if (!resolve_judging(so, jo, judging)) return kExitBadUsage;
  tamis::PlaceOptions& place = judging.place;
  tamis::AuditIndex index;
  std::error_code ec;
  if (!std::filesystem::is_directory(dir, ec)) {
    std::fprintf(stderr, "tamis: %s is not a folder: give split the --out folder of an earlier audit\n", safe(dir).c_str());
    return kExitCannotRun;
  }
  if (!std::filesystem::exists(std::filesystem::path(dir) / tamis::kIndexFileName, ec)) {
    std::fprintf(stderr, "tamis: %s holds no %s: it is not the --out folder of a finished audit\n", safe(dir).c_str(),
                 tamis::kIndexFileName);
    return kExitCannotRun;
  }
  try {
    index = tamis::load_index(std::filesystem::path(dir) / tamis::kIndexFileName);
  } catch (const std::exception& e) {
    say(e);
    return kExitCannotRun;
  }
  try {  // early, before the split: the output layer checks again when it writes
    tamis::refuse_inside_root(index.settings.root, out, "--out");
    if (!jo.junit.empty()) tamis::refuse_inside_root(index.settings.root, jo.junit, "--junit");
  } catch (const tamis::InsideRootError& e) {
    say(e);
    return kExitBadUsage;
  }
  tamis::AuditResult result;
  try {
    result = tamis::place(std::move(index), place);
  } catch (const std::exception& e) {
    say(e);
    return kExitCannotRun;
  }
  return finish(result, out, jo, quiet, false);
}

int run_export_command(const std::string& dir, const std::string& tree, const std::string& mode, bool replace,
                       bool quiet) {
  tamis::ExportSettings s;
  s.outputs = dir;
  s.tree = tree;
  s.mode = mode == "copy" ? tamis::ExportMode::copy : mode == "hardlink" ? tamis::ExportMode::hardlink : tamis::ExportMode::symlink;
  s.replace = replace;
  tamis::ExportResult r;
  try {
    r = tamis::export_tree(s);
  } catch (const tamis::ExportError& e) {
    say(e);
    return e.exit_status;
  } catch (const std::exception& e) {
    say(e);
    return kExitCannotRun;
  }
  if (quiet) return 0;
  const uint64_t images = r.images[0] + r.images[1] + r.images[2];
  const char* how = s.mode == tamis::ExportMode::copy       ? "copies"
                    : s.mode == tamis::ExportMode::hardlink ? "hard links"
                                                            : "symbolic links";
  std::printf("exported %llu image%s (train %llu, val %llu, test %llu) and %llu mask%s into %s as %s%s\n",
              (unsigned long long)images, images == 1 ? "" : "s", (unsigned long long)r.images[0],
              (unsigned long long)r.images[1], (unsigned long long)r.images[2], (unsigned long long)r.masks,
              r.masks == 1 ? "" : "s", safe(r.tree.string()).c_str(), how, r.replaced ? ", replacing the earlier export" : "");
  std::printf("lists: %s/train.txt, val.txt, test.txt\n", safe(r.tree.string()).c_str());
  if (r.renamed > 0)
    std::printf("%llu name%s made distinct within a class folder (name~hash.ext)\n", (unsigned long long)r.renamed,
                r.renamed == 1 ? "" : "s");
  if (r.unlisted > 0)
    std::printf("%llu entr%s with a line break in the name left out of the lists (still in the tree)\n",
                (unsigned long long)r.unlisted, r.unlisted == 1 ? "y" : "ies");
  return 0;
}

// Prints a command's failure and gives its exit status: 2 for what the user can
// mend in the command (an output inside ROOT, a set of parts or join outputs
// the merge refuses), 3 for a run that could not be done.
int failed(const std::exception& e) {
  say(e);
  const bool usage = dynamic_cast<const tamis::InsideRootError*>(&e) || dynamic_cast<const tamis::MergeError*>(&e) ||
                     dynamic_cast<const tamis::JoinFileError*>(&e);
  return usage ? kExitBadUsage : kExitCannotRun;
}

// The shard (or slice) this task takes: `given` ("K/N") when set, else the
// cluster engine's environment (shard.h), else the whole (0/1). Prints and
// returns false when neither makes sense.
bool resolve_shard(const std::string& given, uint32_t count_given, const char* flag, const char* count_flag,
                   tamis::Shard& shard) {
  try {
    if (!given.empty()) {
      shard = tamis::parse_shard(given);
      return true;
    }
    auto env = tamis::shard_from_environment([](const char* name) { return std::getenv(name); }, count_given);
    if (env) {
      shard = *env;
      return true;
    }
    if (count_given > 1) {
      std::fprintf(stderr, "tamis: %s: %u given, but not which one: give %s K/%u, or run as a Slurm array task or a Kubernetes Indexed Job\n",
                   count_flag, count_given, flag, count_given);
      return false;
    }
    shard = {};
    return true;
  } catch (const std::invalid_argument& e) {
    std::fprintf(stderr, "tamis: %s: %s\n", flag, safe(tamis::plain_message(e)).c_str());
    return false;
  }
}

std::string megabytes(uint64_t bytes) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f MB", double(bytes) / 1e6);
  return buf;
}

int run_scan_command(const std::string& root, const std::string& out, const std::string& shard_text, uint32_t shards,
                     const CommonOptions& o) {
  namespace fs = std::filesystem;
  tamis::TreeSettings settings;
  settings.root = absolute_root(root);
  resolve_cache(root, o, settings);
  if (!resolve_reading(o, settings)) return kExitBadUsage;
  tamis::Shard shard;
  if (!resolve_shard(shard_text, shards, "--shard", "--shards", shard)) return kExitBadUsage;
  try {
    tamis::refuse_inside_root(root, out, "--out");
    if (!o.cache.empty()) tamis::refuse_inside_root(root, o.cache, "--cache");
  } catch (const tamis::InsideRootError& e) {
    return failed(e);
  }
  std::error_code ec;
  if (!fs::is_directory(root, ec)) {
    std::fprintf(stderr, "tamis: ROOT %s is not a readable folder\n", root.c_str());
    return kExitCannotRun;
  }
  tamis::cli::ProgressLine progress = progress_for(o);
  settings.read.on_progress = [&progress](size_t done, size_t total) { progress.update(done, total); };
  std::vector<tamis::StageTime> times;
  tamis::ScanPart part;
  try {
    part = tamis::scan_tree(settings, shard, &times);
    progress.finish();
    if (!part.note.empty() && !o.quiet) std::fprintf(stderr, "tamis: %s\n", safe(part.note).c_str());
    tamis::StageClock clock(&times);
    tamis::write_part_file(out, part);
    clock.lap("part");
  } catch (const std::exception& e) {
    progress.finish();
    return failed(e);
  }
  if (o.timings)
    for (const auto& t : times) std::fprintf(stderr, "tamis: %-16s %8.3f s\n", t.stage.c_str(), t.seconds);
  if (o.quiet) return 0;
  uint64_t images = 0, unreadable = 0;
  for (const auto& r : part.records) {
    images += r.kind == tamis::FileKind::image;
    unreadable += r.kind == tamis::FileKind::unreadable;
  }
  const uint64_t files = part.records.size();
  std::printf("shard %s of %s: %llu file%s (%llu image%s or mask%s, %llu unreadable); read %llu, %llu from the cache\n",
              tamis::to_string(shard).c_str(), safe(settings.root.string()).c_str(), (unsigned long long)files,
              files == 1 ? "" : "s", (unsigned long long)images, images == 1 ? "" : "s", images == 1 ? "" : "s",
              (unsigned long long)unreadable, (unsigned long long)part.counts.read,
              (unsigned long long)(part.counts.cached + part.counts.cached_by_hash));
  std::printf("part: %s (%s)\n", safe(out).c_str(), megabytes(fs::file_size(out, ec)).c_str());
  return 0;
}

// The look-alike settings of the policy file (or the defaults); prints and returns false when bad.
bool resolve_lookalike(const std::string& policy_file, tamis::TreeSettings& settings) {
  tamis::Policy policy;
  try {
    policy = policy_file.empty() ? tamis::default_policy() : tamis::load_policy(policy_file);
  } catch (const tamis::PolicyError& e) {
    std::fprintf(stderr, "tamis: %s (%s)\n", safe(tamis::plain_message(e)).c_str(), policy_file.c_str());
    return false;
  }
  take_lookalike(settings.groups, policy.lookalike);
  return true;
}

int run_join_command(const std::vector<std::string>& inputs, const std::string& out, const std::string& slice_text,
                     uint32_t slices, const std::string& policy_file, uint64_t join_memory_mb, const CommonOptions& o) {
  tamis::TreeSettings settings;
  if (!resolve_lookalike(policy_file, settings)) return kExitBadUsage;
  settings.groups.join_memory_bytes = join_memory_mb << 20;
  if (!resolve_reading(o, settings)) return kExitBadUsage;
  tamis::Shard slice;
  if (!resolve_shard(slice_text, slices, "--slice", "--slices", slice)) return kExitBadUsage;
  std::vector<std::filesystem::path> files(inputs.begin(), inputs.end());
  tamis::JoinSlice js;
  try {
    tamis::PartSet parts(files);
    settings.root = parts.root();
    tamis::refuse_inside_root(parts.root(), out, "--out");
    js = tamis::join_parts(parts, settings, slice);
    tamis::write_join_file(out, js, parts.root());
  } catch (const std::exception& e) {
    return failed(e);
  }
  if (!o.quiet)
    std::printf("join slice %s over %llu records: %zu look-alike pair%s confirmed of %llu candidate hits; output: %s\n",
                tamis::to_string(slice).c_str(), (unsigned long long)js.records, js.links.links.size(),
                js.links.links.size() == 1 ? "" : "s", (unsigned long long)js.links.candidate_hits, safe(out).c_str());
  return 0;
}

int run_merge_command(const std::vector<std::string>& inputs, const std::string& out, const SplitOptions& so,
                      const JudgeOptions& jo, const CommonOptions& o) {
  tamis::TreeSettings settings;
  Judging judging;
  if (!resolve_judging(so, jo, judging)) return kExitBadUsage;
  tamis::PlaceOptions& place = judging.place;
  take_lookalike(settings.groups, place.policy.lookalike);
  if (!resolve_reading(o, settings)) return kExitBadUsage;
  // Parts and join outputs come in one list: each is told by its signature.
  std::vector<std::filesystem::path> part_files;
  std::vector<tamis::JoinSlice> joins;
  tamis::AuditResult result;
  try {
    for (const std::string& f : inputs) {
      if (tamis::is_join_file(f))
        joins.push_back(tamis::load_join(f));
      else
        part_files.push_back(f);
    }
    if (part_files.empty()) throw tamis::MergeError("no parts were given (only join outputs)");
    tamis::PartSet parts(part_files);
    tamis::refuse_inside_root(parts.root(), out, "--out");
    if (!jo.junit.empty()) tamis::refuse_inside_root(parts.root(), jo.junit, "--junit");
    tamis::AuditIndex index = tamis::merge_parts(std::move(parts), joins, settings);
    if (!index.cache_note.empty() && !o.quiet) std::fprintf(stderr, "tamis: %s\n", safe(index.cache_note).c_str());
    result = tamis::place(std::move(index), place);
  } catch (const std::exception& e) {
    return failed(e);
  }
  return finish(result, out, jo, o.quiet, o.timings);
}

}  // namespace

int main(int argc, char** argv) {
  tamis::install_interrupt_cleanup();
  CLI::App app{"tamis: audit a folder-per-class image collection before training"};
  app.set_version_flag("--version", std::string(tamis::kToolName) + " " + tamis::kToolVersion);
  app.require_subcommand(1);
  app.formatter(std::make_shared<HelpFormatter>());  // before the commands: they take it on
  app.footer(
      "'tamis COMMAND --help' describes a command. Exit status: 0 nothing breaks the policy,\n"
      "1 a finding breaks it, 2 a mistake in the command line, 3 the run could not be done.\n"
      "Example: tamis demo swatches && tamis audit swatches --out swatches-audit");

  CommonOptions audit_opts;
  SplitOptions audit_split;
  std::string root, out;
  CLI::App* audit = app.add_subcommand("audit", "read ROOT, check it, split it and write the reports into --out");
  audit->footer(
      "Writes manifest.csv, report.json, report.html and index.cbor into --out (never inside ROOT).\n"
      "Example: tamis audit /data/photos --out /data/photos-audit --split 80/10/10 --seed 7");
  audit->add_option("ROOT", root, "the data set: one folder per class")->required();
  audit->add_option("--out", out, "folder for manifest.csv, report.json, report.html and index.cbor")->required();
  JudgeOptions audit_judge;
  add_split_options(audit, audit_split);
  add_judge_options(audit, audit_judge);
  add_reading_options(audit, audit_opts);

  SplitOptions resplit_opts;
  std::string split_dir, split_out;
  bool split_quiet = false;
  CLI::App* split = app.add_subcommand("split", "re-split from an audit's saved index (DIR/index.cbor), reading no image but report.html's pictures");
  split->footer("Example: tamis split /data/photos-audit --out /data/photos-split-2 --seed 2 --split 80/20");
  split->add_option("DIR", split_dir, "the --out folder of an earlier audit")->required();
  split->add_option("--out", split_out, "folder for the new manifest and reports")->required();
  JudgeOptions split_judge;
  add_split_options(split, resplit_opts);
  add_judge_options(split, split_judge);
  split->add_flag("--quiet", split_quiet, "print nothing but errors");

  std::string export_dir, export_to, export_mode = "symlink";
  bool export_replace = false, export_quiet = false;
  CLI::App* exporter = app.add_subcommand(
      "export", "lay an audit's split out as TREE/<split>/<label>/... (links or copies of ROOT's images, masks in "
                "TREE/masks/...) with one list of paths per split");
  exporter->footer("Example: tamis export /data/photos-audit --to /data/photos-by-split --mode hardlink");
  exporter->add_option("DIR", export_dir, "the --out folder of an audit or a split")->required();
  exporter->add_option("--to", export_to, "the folder to make (new, empty, or an earlier export with --replace); never inside ROOT")
      ->required();
  exporter->add_option("--mode", export_mode, "symlink (default), hardlink or copy")
      ->check(CLI::IsMember({"symlink", "hardlink", "copy"}));
  exporter->add_flag("--replace", export_replace, "replace an earlier export in --to (only one tamis made)");
  exporter->add_flag("--quiet", export_quiet, "print nothing but errors");

  CommonOptions scan_opts;
  std::string scan_root, scan_out, scan_shard;
  uint32_t scan_shards = 0;
  CLI::App* scan = app.add_subcommand(
      "scan", "read one shard of ROOT and save it as a part, for a merge (a task of a cluster job; docs/scale-out.md)");
  scan->footer(
      "Which shard: --shard K/N; else, in a Slurm job array (sbatch --array=0-3), the task's\n"
      "SLURM_ARRAY_TASK_ID and SLURM_ARRAY_TASK_COUNT; else, in a Kubernetes Indexed Job,\n"
      "JOB_COMPLETION_INDEX with --shards N (the Job's completions); else the whole tree (0/1).\n"
      "A file's shard is a hash of its path relative to ROOT: it never depends on the other files.\n"
      "Example: tamis scan /data/photos --shard 0/4 --out /shared/parts/0.part");
  scan->add_option("ROOT", scan_root, "the data set: one folder per class")->required();
  scan->add_option("--out", scan_out, "the part file to write (never inside ROOT)")->required()->option_text("FILE");
  scan->add_option("--shard", scan_shard, "K/N: read shard K (0-based) of N");
  scan->add_option("--shards", scan_shards, "N, when K comes from JOB_COMPLETION_INDEX")->check(CLI::Range(1u, tamis::kMaxShards));
  add_reading_options(scan, scan_opts, false);

  CommonOptions join_opts;
  std::vector<std::string> join_inputs;
  std::string join_out, join_slice, join_policy;
  uint32_t join_slices = 0;
  uint64_t join_memory_mb = tamis::GroupSettings{}.join_memory_bytes >> 20;
  CLI::App* joiner = app.add_subcommand(
      "join", "find one slice of the look-alike pairs over all parts (a task of a cluster job; docs/scale-out.md)");
  joiner->footer(
      "Which slice: --slice K/N; else SLURM_ARRAY_TASK_ID and SLURM_ARRAY_TASK_COUNT of a Slurm job\n"
      "array; else JOB_COMPLETION_INDEX with --slices N; else the whole join (0/1).\n"
      "Give the merge the same --policy and mask folders.\n"
      "Example: tamis join /shared/parts/*.part --slice 1/2 --out /shared/join/1.join");
  joiner->add_option("PART", join_inputs, "every part of the scan")->required();
  joiner->add_option("--out", join_out, "the join output file to write (never inside ROOT)")->required()->option_text("FILE");
  joiner->add_option("--slice", join_slice, "K/N: compute slice K (0-based) of N");
  joiner->add_option("--slices", join_slices, "N, when K comes from JOB_COMPLETION_INDEX")->check(CLI::Range(1u, tamis::kMaxShards));
  joiner->add_option("--policy", join_policy, "policy file (JSON): its look-alike settings");
  joiner->add_option("--threads", join_opts.threads, "worker threads (default: all cores)")->check(CLI::Range(0u, 1024u));
  joiner->add_option("--join-memory-mb", join_memory_mb,
                     "memory the Hamming search may take, in MB (default 64); more is faster on large sets, the pairs are the same")
      ->check(CLI::Range(uint64_t{1}, uint64_t{1} << 20));
  add_mask_options(joiner, join_opts);
  joiner->add_flag("--quiet", join_opts.quiet, "print nothing but errors");

  CommonOptions merge_opts;
  SplitOptions merge_split;
  JudgeOptions merge_judge;
  std::vector<std::string> merge_inputs;
  std::string merge_out;
  CLI::App* merger = app.add_subcommand(
      "merge", "combine the parts of a scan (and the join's outputs) into the outputs one audit of ROOT would write");
  merger->footer(
      "Without join outputs the merge finds the look-alikes itself. Parts of other versions or\n"
      "settings, a missing or repeated shard or slice, or a damaged part are refused (exit 2).\n"
      "Example: tamis merge /shared/parts/*.part /shared/join/*.join --out /shared/audit");
  merger->add_option("PART", merge_inputs, "every part of the scan, and every join output if the join ran as tasks")->required();
  merger->add_option("--out", merge_out, "folder for manifest.csv, report.json, report.html and index.cbor")->required();
  add_split_options(merger, merge_split);
  add_judge_options(merger, merge_judge);
  merger->add_option("--threads", merge_opts.threads, "worker threads (default: all cores)")->check(CLI::Range(0u, 1024u));
  add_mask_options(merger, merge_opts);
  merger->add_flag("--quiet", merge_opts.quiet, "print nothing but errors");
  merger->add_flag("--timings", merge_opts.timings, "print each stage's wall time on stderr when done");
  merger->add_option("--thumbnail-memory-mb", merge_opts.thumbnail_memory_mb,
                     "memory the look-alike thumbnails may take, in MB (default 64); beyond it a scratch file in $TMPDIR")
      ->check(CLI::Range(uint64_t{0}, uint64_t{1} << 24));

  std::string demo_dir;
  CLI::App* demo = app.add_subcommand("demo", "write the demo data set (textile swatches) into DIR");
  demo->footer("Example: tamis demo swatches && tamis audit swatches --out swatches-audit");
  demo->add_option("DIR", demo_dir, "folder to write into")->required();

  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    std::string help = "tamis";
    for (const CLI::App* sub : app.get_subcommands()) help += " " + sub->get_name();
    std::fprintf(stderr, "tamis: %s\n'%s --help' lists the options, with an example.\n", safe(usage_message(e)).c_str(),
                 help.c_str());
    return kExitBadUsage;
  }

  if (audit->parsed()) return run_audit_command(root, out, audit_split, audit_judge, audit_opts);
  if (split->parsed()) return run_split_command(split_dir, split_out, resplit_opts, split_judge, split_quiet);
  if (exporter->parsed()) return run_export_command(export_dir, export_to, export_mode, export_replace, export_quiet);
  if (scan->parsed()) return run_scan_command(scan_root, scan_out, scan_shard, scan_shards, scan_opts);
  if (joiner->parsed())
    return run_join_command(join_inputs, join_out, join_slice, join_slices, join_policy, join_memory_mb, join_opts);
  if (merger->parsed()) return run_merge_command(merge_inputs, merge_out, merge_split, merge_judge, merge_opts);
  if (demo->parsed()) {
    try {
      size_t n = tamis::write_demo(demo_dir);
      std::printf("wrote %zu files into %s\nnext: tamis audit %s --out %s-audit\n", n, safe(demo_dir).c_str(),
                  safe(demo_dir).c_str(), safe(demo_dir).c_str());
      return 0;
    } catch (const tamis::DemoTargetError& e) {
      std::fprintf(stderr, "tamis: %s\n", safe(e.what()).c_str());
      return kExitBadUsage;
    } catch (const std::exception& e) {
      say(e);
      return kExitCannotRun;
    }
  }
  return kExitBadUsage;
}
