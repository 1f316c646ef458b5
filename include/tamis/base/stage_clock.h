// Wall time of the stages of a run, for --timings and the benchmarks. Never in a
// report: it is not deterministic.
#pragma once

#include <chrono>
#include <string>
#include <vector>

namespace tamis {

// The wall time of one stage, in the order the stages ran.
struct StageTime {
  std::string stage;
  double seconds = 0;
  bool overlapped = false;  // part of a stage whose pieces ran at once: shown, not added up
};

// Appends the wall time since the previous lap (or since construction) to
// `times` under `stage`; records nothing when `times` is null.
class StageClock {
 public:
  explicit StageClock(std::vector<StageTime>* times) : times_(times), last_(std::chrono::steady_clock::now()) {}
  void lap(const char* stage) {
    const auto now = std::chrono::steady_clock::now();
    if (times_) times_->push_back({stage, std::chrono::duration<double>(now - last_).count()});
    last_ = now;
  }

 private:
  std::vector<StageTime>* times_;
  std::chrono::steady_clock::time_point last_;
};

}  // namespace tamis
