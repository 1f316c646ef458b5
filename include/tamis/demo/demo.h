// The demo data set: a textile-swatch collection of the project's own, drawn
// procedurally (a weaving studio sorting fabric photos by pattern; tartan holds
// inspection photographs of pulled threads with their masks), 256 files, with
// one of each problem tamis reports planted on purpose: a sibling mask folder,
// an orphan, an empty and a wrongly sized mask; byte copies (one under another
// class), mirrored, re-encoded and lightly blurred copies; a truncated JPEG and
// a text file named like an image; a valid 4:1:1 JPEG (no finding); gray stored
// as RGB, an unused alpha channel, 16 bits a sample; tiny, blank, dark and
// blurred frames; an EXIF-rotated JPEG and one with a GPS position; two
// spellings of one class, two small classes and an unbalanced one; a stray text
// file and a hidden file. tests/cli/cli_test.py (DEMO_FINDINGS) lists what the
// audit must report, and nothing else.
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
