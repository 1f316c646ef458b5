// Shards: a deterministic share of a tree for one scan task (docs/scale-out.md).
//
// An entry (file, folder, link) belongs to shard XXH3-64(relative path) mod N:
// its shard depends on its own path and N only, never on the other entries, the
// machine or the listing order, so N tasks that each keep their own share of
// the same listing cover every entry exactly once.
// Slices of the look-alike join use the same K/N notation (relate/groups.h).
#pragma once

#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>

#include "tamis/read/walk.h"

namespace tamis {

struct Shard {
  uint32_t index = 0;  // K, 0-based
  uint32_t count = 1;  // N >= 1
  bool whole() const { return count == 1; }
};

inline constexpr uint32_t kMaxShards = 1u << 20;

// The shard of a relative path among `count`.
uint32_t shard_of(std::string_view rel_path, uint32_t count);

// Keeps of `walk` only the files, links, special files, unreadable folders and
// folders of `shard` (each list stays sorted).
void keep_shard(WalkResult& walk, Shard shard);

// "K/N" with 0 <= K < N <= kMaxShards; throws std::invalid_argument with a sentence otherwise.
Shard parse_shard(std::string_view text);

// The shard a cluster engine gives this task, from its environment (`get`
// returns a variable's value or null):
//  - Slurm job arrays: K = SLURM_ARRAY_TASK_ID - SLURM_ARRAY_TASK_MIN and
//    N = SLURM_ARRAY_TASK_COUNT (the array must be a plain range, step 1:
//    --array=0-3 or 1-4);
//  - Kubernetes Indexed Jobs: K = JOB_COMPLETION_INDEX, with N = `count_given`
//    (the Job's completions; 0: not given).
// nullopt when neither is set; throws std::invalid_argument when the variables
// are inconsistent or N is missing.
std::optional<Shard> shard_from_environment(const std::function<const char*(const char*)>& get, uint32_t count_given);

std::string to_string(Shard s);  // "K/N"

}  // namespace tamis
