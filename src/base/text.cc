#include "tamis/base/text.h"

namespace tamis {

size_t utf8_sequence_length(std::string_view s, size_t i) {
  auto at = [&](size_t k) { return static_cast<unsigned char>(s[k]); };
  const unsigned char c = at(i);
  if (c < 0x80) return 1;
  size_t len;
  unsigned char lo = 0x80, hi = 0xBF;  // the range of the second byte
  if (c >= 0xC2 && c <= 0xDF) len = 2;
  else if (c == 0xE0) { len = 3; lo = 0xA0; }         // no overlong forms
  else if (c >= 0xE1 && c <= 0xEC) len = 3;
  else if (c == 0xED) { len = 3; hi = 0x9F; }          // no surrogates
  else if (c >= 0xEE && c <= 0xEF) len = 3;
  else if (c == 0xF0) { len = 4; lo = 0x90; }          // no overlong forms
  else if (c >= 0xF1 && c <= 0xF3) len = 4;
  else if (c == 0xF4) { len = 4; hi = 0x8F; }          // nothing above U+10FFFF
  else return 0;
  if (i + len > s.size()) return 0;
  if (at(i + 1) < lo || at(i + 1) > hi) return 0;
  for (size_t k = 2; k < len; ++k)
    if (at(i + k) < 0x80 || at(i + k) > 0xBF) return 0;
  return len;
}

bool is_utf8(std::string_view s) {
  for (size_t i = 0; i < s.size();) {
    const size_t n = utf8_sequence_length(s, i);
    if (!n) return false;
    i += n;
  }
  return true;
}

std::string escape_name(std::string_view name) {
  static const char kHex[] = "0123456789ABCDEF";
  std::string out;
  out.reserve(name.size() + 8);
  for (size_t i = 0; i < name.size();) {
    const size_t n = utf8_sequence_length(name, i);
    if (n == 0 || name[i] == '%') {
      const auto c = static_cast<unsigned char>(name[i]);
      out.push_back('%');
      out.push_back(kHex[c >> 4]);
      out.push_back(kHex[c & 15]);
      ++i;
    } else {
      out.append(name.substr(i, n));
      i += n;
    }
  }
  return out;
}

std::optional<std::string> unescape_name(std::string_view text) {
  auto hex = [](char c) -> int {
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    return -1;
  };
  std::string out;
  out.reserve(text.size());
  for (size_t i = 0; i < text.size(); ++i) {
    if (text[i] != '%') {
      out.push_back(text[i]);
      continue;
    }
    if (i + 2 >= text.size()) return std::nullopt;  // two hex digits must follow
    const int h = hex(text[i + 1]), l = hex(text[i + 2]);
    if (h < 0 || l < 0) return std::nullopt;
    out.push_back(static_cast<char>(h * 16 + l));
    i += 2;
  }
  return out;
}

std::string hex64(uint64_t v) {
  std::string out(16, '0');
  for (int k = 15; k >= 0; --k, v >>= 4) out[static_cast<size_t>(k)] = "0123456789abcdef"[v & 15];
  return out;
}

}  // namespace tamis
