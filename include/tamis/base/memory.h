// Large tables touched once from end to end (the record table, the cache's rows)
// fault in one 4 KB page at a time, and on virtual machines a fault costs
// microseconds. These helpers ask the kernel for 2 MB pages on the part of a
// fresh allocation that spans whole 2 MB pages (advice only: a kernel without
// transparent huge pages, or with them off, ignores it; nothing else changes).
#pragma once

#include <cstddef>
#include <vector>

namespace tamis {

// Advises huge pages for the 2 MB-aligned pages inside [p, p + bytes).
void advise_huge_pages(const void* p, size_t bytes);

// Reserves room for n elements and advises huge pages for it, before anything
// is written there (a page already touched keeps its size).
template <typename T>
void reserve_huge(std::vector<T>& v, size_t n) {
  v.reserve(n);
  advise_huge_pages(v.data(), v.capacity() * sizeof(T));
}

}  // namespace tamis
