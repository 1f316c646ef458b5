// The header of a Netpbm file (PBM, PGM, PPM: P1..P6, fields separated by
// whitespace and comments; PAM: P7, keyword lines up to ENDHDR). The probe
// reads sizes and modes from it, the decoder the maxval that PNM samples run to.
// Bounds-checked: never reads past `bytes`; pure; thread-safe.
#pragma once

#include <cstddef>
#include <cstdint>
#include <span>

namespace tamis {

struct PnmHeader {
  enum class Status { ok, truncated, bad };  // bad: not a Netpbm signature, or a header PAM does not end
  Status status = Status::bad;
  char kind = 0;          // '1'..'7'
  uint64_t width = 0, height = 0;
  uint64_t maxval = 1;    // 1 for bitmaps (P1, P4)
  uint64_t depth = 1;     // channels: 1, 3 for P3/P6, PAM's DEPTH
  size_t data_at = 0;     // the first byte after the header
};

// `bytes` starts with 'P' and a kind digit (else status bad).
PnmHeader read_pnm_header(std::span<const uint8_t> bytes);

}  // namespace tamis
