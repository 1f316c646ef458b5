// Reading CBOR (RFC 8949) from a file tamis did not necessarily write: the saved
// index, a scan's part, a join's output.
//
// nlohmann::json's CBOR reader descends one call per level of nesting, so a
// file of a few hundred kilobytes of nested arrays exhausts the stack: a crash,
// not an error. Checksums do not prevent it (anyone can compute XXH3 over a
// forged file). parse_cbor stops at `max_depth` levels (our files nest at most
// 5) and throws std::runtime_error for that and for any malformed input.
#pragma once

#include <cstddef>
#include <cstdint>

#include <nlohmann/json.hpp>

namespace tamis {

inline constexpr size_t kCborMaxDepth = 32;

nlohmann::json parse_cbor(const uint8_t* begin, const uint8_t* end, size_t max_depth = kCborMaxDepth);

}  // namespace tamis
