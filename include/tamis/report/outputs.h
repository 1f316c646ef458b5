// The reports stage: writes manifest.csv, report.json, report.html and the saved
// index (index.cbor, for `tamis split`) into the output folder, each atomically
// (temporary name, then rename), two at a time, and the JUnit file when asked;
// then the set file (tamis-set.json) that says the set is whole.
//
// The output layer alone guards "never inside ROOT": every file it writes is
// first checked against the audited ROOT (result.settings.root), whichever
// command asks, and a target inside it throws InsideRootError before anything is
// written. (The CLI also checks --out and --cache early, before reading, so that
// a long run does not end in a refusal; that is a convenience, not the guard.)
// Creates `out_dir` when missing. Throws std::runtime_error when a file cannot
// be written.
#pragma once

#include <filesystem>
#include <stdexcept>
#include <string>

#include "tamis/pipeline/audit.h"
#include "tamis/read/part_file.h"
#include "tamis/relate/join_file.h"
#include "tamis/report/index_file.h"

namespace tamis {

// The set file, written last into the output folder: the files of the set with
// their sizes and XXH3-64 (atomic_file.h StagedFiles, docs/outputs.md).
inline constexpr const char* kSetFileName = "tamis-set.json";

// Bytes of picture data URIs report.html carries by default (about 1 MB).
inline constexpr size_t kThumbnailBudget = 1024 * 1024;
inline constexpr uint32_t kPreviewSide = 256;  // report pictures from the files: longer side, px

// A write refused because its target is ROOT or lies inside it.
struct InsideRootError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// Throws InsideRootError when `target` (what: "--out", "--junit", ...) is `root`
// or lies inside it (walk.h path_is_inside: canonical paths where they exist).
void refuse_inside_root(const std::filesystem::path& root, const std::filesystem::path& target, const std::string& what);

// The four files are written two at a time (reports on a second thread), then
// the JUnit file when `junit_file` is not empty; both targets are checked against
// ROOT before anything is written. `times`, when set, receives the stage's wall
// time ("outputs") and then each file's own time, marked overlapped.
void write_outputs(const std::filesystem::path& out_dir, const AuditResult& result,
                   size_t thumbnail_budget = kThumbnailBudget, std::vector<StageTime>* times = nullptr,
                   const std::filesystem::path& junit_file = {});

// A scan's part (read/part_file.h) and a join task's output (relate/join_file.h):
// each one file, written atomically (its folder made when missing), refused
// (InsideRootError) when it is ROOT or inside it.
void write_part_file(const std::filesystem::path& file, const ScanPart& part);
void write_join_file(const std::filesystem::path& file, const JoinSlice& slice, const std::filesystem::path& root);

}  // namespace tamis
