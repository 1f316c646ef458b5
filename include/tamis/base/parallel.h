// Parallel loops over an index range, for stages whose per-item work is independent.
//
// parallel_for(n, threads, fn) calls fn(i) exactly once for every i in [0, n),
// from up to `threads` threads (0 = all cores). Items are handed out in small
// chunks in index order; the caller writes results into slot i, so the outcome
// never depends on the thread count or on scheduling. An exception thrown by
// fn stops the loop and is rethrown to the caller after every thread has joined.
#pragma once

#include <atomic>
#include <cstddef>
#include <exception>
#include <mutex>
#include <thread>
#include <vector>

namespace tamis {

inline unsigned resolve_threads(unsigned requested) {
  if (requested > 0) return requested;
  unsigned hw = std::thread::hardware_concurrency();
  return hw == 0 ? 1 : hw;
}

template <typename Fn>
void parallel_for(size_t n, unsigned threads, Fn&& fn, size_t chunk = 16) {
  threads = resolve_threads(threads);
  if (threads <= 1 || n <= chunk) {
    for (size_t i = 0; i < n; ++i) fn(i);
    return;
  }
  std::atomic<size_t> next{0};
  std::atomic<bool> stop{false};
  std::exception_ptr error;
  std::mutex error_mutex;
  auto work = [&] {
    while (!stop.load(std::memory_order_relaxed)) {
      size_t begin = next.fetch_add(chunk, std::memory_order_relaxed);
      if (begin >= n) return;
      size_t end = begin + chunk < n ? begin + chunk : n;
      try {
        for (size_t i = begin; i < end; ++i) fn(i);
      } catch (...) {
        std::lock_guard<std::mutex> lock(error_mutex);
        if (!error) error = std::current_exception();
        stop = true;
      }
    }
  };
  std::vector<std::thread> pool;
  unsigned extra = threads - 1;
  pool.reserve(extra);
  for (unsigned t = 0; t < extra; ++t) pool.emplace_back(work);
  work();
  for (auto& t : pool) t.join();
  if (error) std::rethrow_exception(error);
}

}  // namespace tamis
