#include "tamis/read/shard.h"

#include <algorithm>
#include <charconv>
#include <stdexcept>

#include <xxhash.h>

namespace tamis {

uint32_t shard_of(std::string_view rel_path, uint32_t count) {
  if (count <= 1) return 0;
  return static_cast<uint32_t>(XXH3_64bits(rel_path.data(), rel_path.size()) % count);
}

void keep_shard(WalkResult& walk, Shard shard) {
  if (shard.whole()) return;
  auto other = [&](std::string_view p) { return shard_of(p, shard.count) != shard.index; };
  std::erase_if(walk.files, [&](const WalkEntry& e) { return other(e.path); });
  for (auto* list : {&walk.links, &walk.special, &walk.unreadable_dirs, &walk.dirs})
    std::erase_if(*list, [&](const std::string& p) { return other(p); });
}

namespace {

std::optional<uint64_t> number(std::string_view s) {
  uint64_t v = 0;
  const auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), v);
  if (s.empty() || ec != std::errc() || end != s.data() + s.size()) return std::nullopt;
  return v;
}

Shard checked(uint64_t k, uint64_t n, const std::string& what) {
  if (n < 1 || n > kMaxShards)
    throw std::invalid_argument(what + ": the number of shards must be 1 to " + std::to_string(kMaxShards));
  if (k >= n)
    throw std::invalid_argument(what + ": shard " + std::to_string(k) + " does not exist among " + std::to_string(n) +
                                " (they are numbered 0 to " + std::to_string(n - 1) + ")");
  return {static_cast<uint32_t>(k), static_cast<uint32_t>(n)};
}

}  // namespace

Shard parse_shard(std::string_view text) {
  const size_t slash = text.find('/');
  const auto k = number(text.substr(0, slash));
  const auto n = slash == std::string_view::npos ? std::nullopt : number(text.substr(slash + 1));
  if (!k || !n) throw std::invalid_argument("'" + std::string(text) + "' is not K/N (for example 0/4)");
  return checked(*k, *n, "'" + std::string(text) + "'");
}

std::optional<Shard> shard_from_environment(const std::function<const char*(const char*)>& get, uint32_t count_given) {
  auto value = [&](const char* name) -> std::optional<uint64_t> {
    const char* v = get(name);
    if (!v) return std::nullopt;
    auto n = number(v);
    if (!n) throw std::invalid_argument(std::string(name) + "='" + v + "' is not a whole number");
    return n;
  };
  if (auto id = value("SLURM_ARRAY_TASK_ID")) {
    const auto count = value("SLURM_ARRAY_TASK_COUNT");
    const auto lo = value("SLURM_ARRAY_TASK_MIN");
    const auto hi = value("SLURM_ARRAY_TASK_MAX");
    const auto step = value("SLURM_ARRAY_TASK_STEP");
    if (!count || !lo || !hi)
      throw std::invalid_argument("SLURM_ARRAY_TASK_ID is set without SLURM_ARRAY_TASK_COUNT, _MIN and _MAX");
    if ((step && *step != 1) || *hi < *lo || *hi - *lo + 1 != *count || *id < *lo)
      throw std::invalid_argument("the Slurm array is not a plain range (use --array=0-" +
                                  std::to_string(*count ? *count - 1 : 0) + ", or give --shard K/N)");
    if (count_given && count_given != *count)
      throw std::invalid_argument("the Slurm array has " + std::to_string(*count) + " tasks, not " +
                                  std::to_string(count_given));
    return checked(*id - *lo, *count, "the Slurm array");
  }
  if (auto index = value("JOB_COMPLETION_INDEX")) {
    if (!count_given)
      throw std::invalid_argument("JOB_COMPLETION_INDEX is set: give the number of shards (--shards N, the Job's completions)");
    return checked(*index, count_given, "JOB_COMPLETION_INDEX");
  }
  return std::nullopt;
}

std::string to_string(Shard s) { return std::to_string(s.index) + "/" + std::to_string(s.count); }

}  // namespace tamis
