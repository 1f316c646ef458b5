// The reports stage: writes manifest.csv, report.json, report.html and the saved
// index (index.cbor, for `tamis split`) into the output folder, each atomically
// (temporary name, then rename), two at a time.
//
// REQUIRES: `out_dir` is not inside the audited ROOT (the CLI refuses that
// before anything is read). Creates `out_dir` when missing. Throws
// std::runtime_error when a file cannot be written.
#pragma once

#include <filesystem>

#include "tamis/audit.h"
#include "tamis/index_file.h"

namespace tamis {

// Bytes of thumbnail data URIs report.html carries by default (about 300 KB).
inline constexpr size_t kThumbnailBudget = 300 * 1024;

// The four files are written two at a time (reports on a second thread).
// `times`, when set, receives the stage's wall time ("outputs") and then each
// file's own time, marked overlapped.
void write_outputs(const std::filesystem::path& out_dir, const AuditResult& result,
                   size_t thumbnail_budget = kThumbnailBudget, std::vector<StageTime>* times = nullptr);

}  // namespace tamis
