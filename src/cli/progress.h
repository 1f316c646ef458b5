// Progress on stderr, shown when stderr is a terminal or --progress asks for it.
// On a terminal: one line rewritten in place ("read 1200/70000 files, 5400/s,
// 12 s left"), at most every 100 ms, cleared by finish(). Elsewhere (a pipe, a
// CI log): plain lines without escape codes ("tamis: read 7000/70000 files
// (10%), 5400/s, 12 s left"), one each time another tenth is read or a minute
// has passed, and one when all are read; finish() prints nothing.
// Thread-safe: update() may be called from any worker.
#pragma once

#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstdio>
#include <mutex>

namespace tamis::cli {

class ProgressLine {
 public:
  // `terminal`: rewrite one line in place; else plain lines.
  ProgressLine(bool enabled, bool terminal) : enabled_(enabled), terminal_(terminal), start_(Clock::now()) {}

  static bool stderr_is_terminal() { return isatty(STDERR_FILENO) == 1; }

  void update(size_t done, size_t total) {
    if (!enabled_) return;
    auto now = Clock::now();
    int64_t ms = std::chrono::duration_cast<std::chrono::milliseconds>(now - start_).count();
    int64_t last = last_ms_.load(std::memory_order_relaxed);
    const int tenth = total > 0 ? static_cast<int>(done * 10 / total) : 10;
    if (terminal_ ? (done != total && ms - last < 100)
                  : (tenth <= last_tenth_.load(std::memory_order_relaxed) && ms - last < 60000))
      return;
    // On a terminal a busy lock skips the update (the next one redraws the line);
    // a plain line is due only at a tenth or a minute, and is waited for, so that
    // the 100% line is never lost to another thread's print.
    std::unique_lock<std::mutex> lock(mutex_, std::defer_lock);
    if (terminal_) {
      if (!lock.try_lock()) return;
    } else {
      lock.lock();
      if (tenth <= last_tenth_ && ms - last_ms_ < 60000) return;  // another thread printed it
    }
    last_ms_ = ms;
    last_tenth_ = tenth;
    double rate = ms > 0 ? done * 1000.0 / ms : 0.0;
    double left = rate > 0 ? (total - done) / rate : 0.0;
    if (terminal_)
      std::fprintf(stderr, "\r\033[Kread %zu/%zu files, %.0f/s, %.0f s left", done, total, rate, left);
    else
      std::fprintf(stderr, "tamis: read %zu/%zu files (%d%%), %.0f/s, %.0f s left\n", done, total,
                   total > 0 ? static_cast<int>(done * 100 / total) : 100, rate, left);
    std::fflush(stderr);
    shown_ = true;
  }

  void finish() {
    if (enabled_ && terminal_ && shown_) {
      std::fprintf(stderr, "\r\033[K");
      std::fflush(stderr);
    }
  }

 private:
  using Clock = std::chrono::steady_clock;
  bool enabled_, terminal_;
  bool shown_ = false;
  Clock::time_point start_;
  std::atomic<int64_t> last_ms_{-1000};
  std::atomic<int> last_tenth_{-1};
  std::mutex mutex_;
};

}  // namespace tamis::cli
