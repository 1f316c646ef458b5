// A join task's output: the confirmed look-alike pairs of one slice of the join
// (groups.h join_lookalike_slice), for `tamis merge` (docs/scale-out.md).
//
// Layout: a 16-byte signature, XXH3-64 of every byte after it (8 bytes, little-
// endian), then one CBOR map: tool version, the slice, the groups' settings key,
// the key of the parts it was computed from (their first checksums, in shard
// order) and their record count, the candidate hits, and the links
// [a, b, turn, correlation, blur step, blurred a, fit source] in record indices
// of the merged records. Loading checks all of it and throws JoinFileError.
#pragma once

#include <cstdint>
#include <filesystem>
#include <ostream>
#include <stdexcept>
#include <string>

#include "tamis/read/shard.h"
#include "tamis/relate/groups.h"

namespace tamis {

struct JoinFileError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

struct JoinSlice {
  std::string tool;           // the tool version that wrote it
  Shard slice;                // slice K of N of the join
  std::string groups_key;     // groups.h group_settings_key of the settings it used
  uint64_t parts_key = 0;     // names the parts it read (merge checks it)
  uint64_t records = 0;       // records of the merged parts
  LookalikeLinks links;
};

void write_join(std::ostream& os, const JoinSlice& slice);
JoinSlice load_join(const std::filesystem::path& file);
// True when the file begins with a join output's signature (a merge takes parts
// and join outputs in one list).
bool is_join_file(const std::filesystem::path& file);

}  // namespace tamis
