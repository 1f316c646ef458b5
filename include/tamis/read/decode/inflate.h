// A DEFLATE decoder for small zlib streams (RFC 1950 and RFC 1951), for the
// direct PNG path (decode.h).
//
// zlib builds its Huffman decoding tables for 9-bit (lengths) and 6-bit
// (distances) lookups for every dynamic block, and decodes the last 258 bytes of
// an output buffer in its careful slow loop; on a 28x28 PNG of about 800 bytes
// that is most of the work. This decoder uses one smaller table per code with a
// canonical-code fallback for long codes, and a 64-bit bit buffer.
//
// Contract: inflate_small() returns true only for a complete zlib stream that
// holds exactly `out_size` bytes (no preset dictionary, Adler-32 checked) and
// ends exactly at the end of `in`; `out` then holds the same bytes zlib's
// inflate() gives. It may refuse streams zlib accepts (it is stricter: an
// incomplete Huffman code is refused, for example); its caller then asks zlib.
// It never reads outside `in` nor writes outside [out, out + out_size), whatever
// the bytes (tests compare it with zlib on real and mutated streams).
#pragma once

#include <cstddef>
#include <cstdint>
#include <span>

namespace tamis {

bool inflate_small(std::span<const uint8_t> in, uint8_t* out, size_t out_size);

}  // namespace tamis
