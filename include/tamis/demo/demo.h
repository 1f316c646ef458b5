// The demo data set: a small textile-swatch collection of the project's own,
// drawn procedurally (a weaving studio sorting fabric photos by pattern), with
// the defects tamis exists to find planted on purpose: a byte copy filed under
// another class, a mirrored copy, a truncated JPEG, a second spelling of a class,
// a tiny class, a stray text file and a hidden file. README.md lists them.
//
// Deterministic: the same pixels on every run (SplitMix64-driven drawing).
// Writes only below `dir`, creating it when missing. A `dir` that exists must be
// an empty folder or a demo written before (only the demo's own files and
// folders in it, which are written again); anything else is refused before a
// file is written.
#pragma once

#include <filesystem>
#include <stdexcept>

namespace tamis {

// `dir` is not a folder, or holds something the demo did not write.
struct DemoTargetError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

// Writes the demo tree into `dir`. Returns the number of files written.
// Throws DemoTargetError (above) before writing anything, std::runtime_error
// when a file cannot be written.
size_t write_demo(const std::filesystem::path& dir);

}  // namespace tamis
