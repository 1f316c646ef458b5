// Progress on stderr: one line rewritten in place ("read 1200/70000 files, 5400/s,
// 12 s left"), only when stderr is a terminal or --progress asks for it.
// Thread-safe: update() may be called from any worker; it prints at most every
// 100 ms. finish() clears the line.
#pragma once

#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstdio>
#include <mutex>

namespace tamis::cli {

class ProgressLine {
 public:
  explicit ProgressLine(bool enabled) : enabled_(enabled), start_(Clock::now()) {}

  static bool stderr_is_terminal() { return isatty(STDERR_FILENO) == 1; }

  void update(size_t done, size_t total) {
    if (!enabled_) return;
    auto now = Clock::now();
    int64_t ms = std::chrono::duration_cast<std::chrono::milliseconds>(now - start_).count();
    int64_t last = last_ms_.load(std::memory_order_relaxed);
    if (done != total && ms - last < 100) return;
    std::unique_lock<std::mutex> lock(mutex_, std::try_to_lock);
    if (!lock.owns_lock()) return;
    last_ms_ = ms;
    double rate = ms > 0 ? done * 1000.0 / ms : 0.0;
    double left = rate > 0 ? (total - done) / rate : 0.0;
    std::fprintf(stderr, "\r\033[Kread %zu/%zu files, %.0f/s, %.0f s left", done, total, rate, left);
    std::fflush(stderr);
    shown_ = true;
  }

  void finish() {
    if (enabled_ && shown_) {
      std::fprintf(stderr, "\r\033[K");
      std::fflush(stderr);
    }
  }

 private:
  using Clock = std::chrono::steady_clock;
  bool enabled_;
  bool shown_ = false;
  Clock::time_point start_;
  std::atomic<int64_t> last_ms_{-1000};
  std::mutex mutex_;
};

}  // namespace tamis::cli
