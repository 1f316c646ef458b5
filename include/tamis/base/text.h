// Names from the data set as text. File and folder names are bytes; the text
// outputs are UTF-8. This header says which bytes form UTF-8 (RFC 3629: no
// overlong forms, no surrogates, nothing above U+10FFFF: what Python's and
// pandas' decoders accept) and gives the manifest's reversible escape for names
// that do not.
//
// The escape ("percent"): every byte that is not part of a valid UTF-8 sequence,
// and every '%', is written as '%' and two upper-case hex digits; everything else
// is kept. unescape_name() reverses it exactly. Pure; thread-safe.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <cstdint>
#include <string_view>

namespace tamis {

// Length (1-4) of the valid UTF-8 sequence that starts at s[i], or 0 when the
// byte there does not start one.
size_t utf8_sequence_length(std::string_view s, size_t i);

// Whether the whole string is valid UTF-8.
bool is_utf8(std::string_view s);

// The percent escape of `name` (see above).
std::string escape_name(std::string_view name);

// 16 lower-case hex digits of v, most significant first (the set file's and
// the manifest's hashes, export's distinct names).
std::string hex64(uint64_t v);

// The bytes escape_name() was given; nullopt when `text` holds a '%' that two
// hex digits do not follow.
std::optional<std::string> unescape_name(std::string_view text);

}  // namespace tamis
