// Atomic output files: write under a temporary name in the target folder, then
// rename into place, so a reader (or a killed run) never sees half a file.
#pragma once

#include <filesystem>
#include <functional>
#include <ostream>

namespace tamis {

// Calls `write` with a stream to a temporary file beside `target`, flushes and
// fsyncs it, then renames it to `target`. On any failure the temporary file is
// removed and std::runtime_error is thrown; `target` is then left as it was.
void write_file_atomically(const std::filesystem::path& target, const std::function<void(std::ostream&)>& write);

}  // namespace tamis
