// tamis: the command line. Parses options and wires the stages; holds no logic
// of its own beyond turning outcomes into exit statuses (docs/cli.md):
//   0 nothing breaks the policy, 1 a finding breaks it, 2 bad command line,
//   3 the run could not be done.
#include <cstdio>
#include <fstream>
#include <iostream>
#include <string>

#include <CLI/CLI.hpp>

#include "progress.h"
#include "tamis/audit.h"
#include "tamis/demo.h"
#include "tamis/index_file.h"
#include "tamis/manifest.h"
#include "tamis/outputs.h"
#include "tamis/version.h"

namespace {

constexpr int kExitBadUsage = 2;
constexpr int kExitCannotRun = 3;

struct CommonOptions {
  unsigned threads = 0;
  std::string cache;
  bool no_cache = false;
  bool quiet = false;
  bool progress = false;
  bool no_progress = false;
};

void add_reading_options(CLI::App* cmd, CommonOptions& o) {
  cmd->add_option("--threads", o.threads, "worker threads (default: all cores)")->check(CLI::Range(0u, 1024u));
  cmd->add_option("--cache", o.cache, "cache file for per-file records (never inside ROOT)");
  cmd->add_flag("--no-cache", o.no_cache, "do not read or write a cache");
  cmd->add_flag("--quiet", o.quiet, "print nothing but errors");
  cmd->add_flag("--progress", o.progress, "show a progress line on stderr even when it is not a terminal");
  cmd->add_flag("--no-progress", o.no_progress, "never show a progress line");
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
};

void add_split_options(CLI::App* cmd, SplitOptions& o) {
  cmd->add_option("--seed", o.seed, "seed of the split (default 1)");
  cmd->add_option("--split", o.spec, "train/val/test percentages, or train/test (default 70/15/15)");
  cmd->add_flag("--stable", o.stable, "decide each group's split by a keyed hash, so added files never move others");
  cmd->add_option("--keep", o.keep, "a previous manifest.csv: keep its splits, place only new files");
  cmd->add_option("--per-class", o.per_class, "at most N images a class (whole groups), the rest excluded");
  cmd->add_option("--folds", o.folds, "deal train+val into K folds (stratified, groups whole): a fold column")
      ->check(CLI::Range(2u, 1000u));
  cmd->add_flag("--resplit", o.resplit, "in a tree already split into train/val/test folders, draw a new split");
}

// Turns the options into settings and the keep map; prints and returns false when bad.
bool resolve_split(const SplitOptions& o, tamis::SplitSettings& s, tamis::KeepMap& keep, bool& have_keep) {
  try {
    s.percent = tamis::parse_split_spec(o.spec);
  } catch (const std::invalid_argument& e) {
    std::fprintf(stderr, "tamis: %s\n", e.what());
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
      std::fprintf(stderr, "tamis: --keep %s: %s\n", o.keep.c_str(), e.what());
      return false;
    }
  }
  return true;
}

void print_summary(const tamis::AuditResult& r, const std::filesystem::path& out) {
  const auto& t = r.totals;
  size_t errors = 0, warnings = 0;
  for (const auto& f : r.findings) {
    if (f.severity == tamis::Severity::error) ++errors;
    if (f.severity == tamis::Severity::warning) ++warnings;
  }
  std::printf("files seen %llu: %llu images, %llu masks, %llu unreadable, %llu ignored; %zu classes\n",
              (unsigned long long)t.files_seen, (unsigned long long)t.images, (unsigned long long)t.masks,
              (unsigned long long)t.unreadable, (unsigned long long)t.ignored, r.labels.names.size());
  std::printf("findings: %zu errors, %zu warnings, %zu in all\n", errors, warnings, r.findings.size());
  std::printf("reports: %s\n", (out / "report.html").string().c_str());
}

int run_audit_command(const std::string& root, const std::string& out, const SplitOptions& so,
                      const CommonOptions& o) {
  namespace fs = std::filesystem;
  tamis::AuditSettings settings;
  settings.root = root;
  tamis::KeepMap keep;
  bool have_keep = false;
  if (!resolve_split(so, settings.split, keep, have_keep)) return kExitBadUsage;
  settings.read.threads = o.threads;
  if (tamis::path_is_inside(root, out)) {
    std::fprintf(stderr, "tamis: --out %s lies inside ROOT %s; tamis never writes inside the data set\n",
                 out.c_str(), root.c_str());
    return kExitBadUsage;
  }
  if (!o.cache.empty() && tamis::path_is_inside(root, o.cache)) {
    std::fprintf(stderr, "tamis: --cache %s lies inside ROOT; tamis never writes inside the data set\n",
                 o.cache.c_str());
    return kExitBadUsage;
  }
  std::error_code ec;
  if (!fs::is_directory(root, ec)) {
    std::fprintf(stderr, "tamis: ROOT %s is not a readable folder\n", root.c_str());
    return kExitCannotRun;
  }
  bool show = !o.quiet && !o.no_progress && (o.progress || tamis::cli::ProgressLine::stderr_is_terminal());
  tamis::cli::ProgressLine progress(show);
  settings.read.on_progress = [&progress](size_t done, size_t total) { progress.update(done, total); };
  tamis::AuditResult result;
  try {
    result = tamis::place(tamis::read_tree(settings), settings.split, have_keep ? &keep : nullptr);
    progress.finish();
    tamis::write_outputs(out, result);
  } catch (const std::exception& e) {
    progress.finish();
    std::fprintf(stderr, "tamis: %s\n", e.what());
    return kExitCannotRun;
  }
  if (!o.quiet) print_summary(result, out);
  return tamis::policy_exit_status(result);
}

int run_split_command(const std::string& dir, const std::string& out, const SplitOptions& so, bool quiet) {
  tamis::SplitSettings split;
  tamis::KeepMap keep;
  bool have_keep = false;
  if (!resolve_split(so, split, keep, have_keep)) return kExitBadUsage;
  tamis::AuditIndex index;
  try {
    index = tamis::load_index(std::filesystem::path(dir) / tamis::kIndexFileName);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "tamis: %s\n", e.what());
    return kExitCannotRun;
  }
  if (tamis::path_is_inside(index.settings.root, out)) {
    std::fprintf(stderr, "tamis: --out %s lies inside the audited ROOT; tamis never writes inside the data set\n",
                 out.c_str());
    return kExitBadUsage;
  }
  tamis::AuditResult result;
  try {
    result = tamis::place(std::move(index), split, have_keep ? &keep : nullptr);
    tamis::write_outputs(out, result);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "tamis: %s\n", e.what());
    return kExitCannotRun;
  }
  if (!quiet) print_summary(result, out);
  return tamis::policy_exit_status(result);
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"tamis: audit a folder-per-class image collection before training"};
  app.set_version_flag("--version", std::string(tamis::kToolName) + " " + tamis::kToolVersion);
  app.require_subcommand(1);

  CommonOptions audit_opts;
  SplitOptions audit_split;
  std::string root, out;
  CLI::App* audit = app.add_subcommand("audit", "read ROOT, check it, split it and write the reports into --out");
  audit->add_option("ROOT", root, "the data set: one folder per class")->required();
  audit->add_option("--out", out, "folder for manifest.csv, report.json, report.html and index.cbor")->required();
  add_split_options(audit, audit_split);
  add_reading_options(audit, audit_opts);

  SplitOptions resplit_opts;
  std::string split_dir, split_out;
  bool split_quiet = false;
  CLI::App* split = app.add_subcommand("split", "re-split from an audit's saved index (DIR/index.cbor), reading no image");
  split->add_option("DIR", split_dir, "the --out folder of an earlier audit")->required();
  split->add_option("--out", split_out, "folder for the new manifest and reports")->required();
  add_split_options(split, resplit_opts);
  split->add_flag("--quiet", split_quiet, "print nothing but errors");

  std::string demo_dir;
  CLI::App* demo = app.add_subcommand("demo", "write the demo data set (textile swatches) into DIR");
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
    app.exit(e);
    return kExitBadUsage;
  }

  if (audit->parsed()) return run_audit_command(root, out, audit_split, audit_opts);
  if (split->parsed()) return run_split_command(split_dir, split_out, resplit_opts, split_quiet);
  if (demo->parsed()) {
    try {
      size_t n = tamis::write_demo(demo_dir);
      std::printf("wrote %zu files into %s\n", n, demo_dir.c_str());
      return 0;
    } catch (const std::exception& e) {
      std::fprintf(stderr, "tamis: %s\n", e.what());
      return kExitCannotRun;
    }
  }
  return kExitBadUsage;
}
