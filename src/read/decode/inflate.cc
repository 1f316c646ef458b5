// DEFLATE for small zlib streams (include/tamis/read/decode/inflate.h). RFC 1951 section
// numbers in the comments.
#include "tamis/read/decode/inflate.h"

#include <zlib.h>

#include <algorithm>
#include <array>
#include <cstring>

namespace tamis {

namespace {

// Bits are taken from the low end of a 64-bit buffer (DEFLATE packs them least
// significant first). Refills load 8 bytes at once while 8 remain; near the end
// they load byte by byte and, past it, zero bytes that are counted, so reading
// never leaves `in` and a stream that needs those bytes is refused at the end.
class BitReader {
 public:
  BitReader(const uint8_t* p, size_t n) : start_(p), p_(p), end_(p + n) {}
  // At least 56 bits in the buffer afterwards.
  void refill() {
    if (end_ - p_ >= 8) {
      uint64_t v;
      std::memcpy(&v, p_, 8);
#if defined(__BYTE_ORDER__) && __BYTE_ORDER__ == __ORDER_BIG_ENDIAN__
      v = __builtin_bswap64(v);
#endif
      buf_ |= v << count_;  // bits at and above count_ are 0 or already the stream's next bits
      p_ += (63 - count_) >> 3;
      count_ |= 56;
    } else {
      while (count_ <= 56) {
        uint64_t byte = 0;
        if (p_ < end_) {
          byte = *p_++;
        } else {
          ++past_end_;
        }
        buf_ |= byte << count_;
        count_ += 8;
      }
    }
  }
  uint32_t peek(int n) const { return static_cast<uint32_t>(buf_ & ((uint64_t{1} << n) - 1)); }
  void drop(int n) {
    buf_ >>= n;
    count_ -= n;
  }
  uint32_t take(int n) {  // REQUIRES n <= the bits buffered
    const uint32_t v = peek(n);
    drop(n);
    return v;
  }
  void align() { drop(count_ & 7); }
  int buffered() const { return count_; }
  // Whole bytes consumed so far (after align()), counting zero bytes past the end.
  size_t consumed() const { return static_cast<size_t>(p_ - start_) + past_end_ - static_cast<size_t>(count_ >> 3); }
  size_t size() const { return static_cast<size_t>(end_ - start_); }

 private:
  const uint8_t* start_;
  const uint8_t* p_;
  const uint8_t* end_;
  uint64_t buf_ = 0;
  int count_ = 0;
  size_t past_end_ = 0;
};

// The low `len` bits of `code`, in reverse order (DEFLATE sends Huffman codes
// most significant bit first into a stream read least significant bit first).
uint32_t reverse_bits(uint32_t code, int len) {
  static const auto kReverse = [] {
    std::array<uint8_t, 256> t{};
    for (int v = 0; v < 256; ++v)
      for (int b = 0; b < 8; ++b)
        if (v >> b & 1) t[static_cast<size_t>(v)] |= static_cast<uint8_t>(1 << (7 - b));
    return t;
  }();
  const uint32_t r16 = (uint32_t{kReverse[code & 255]} << 8) | kReverse[(code >> 8) & 255];
  return r16 >> (16 - len);
}

// A canonical Huffman code (3.2.2): a lookup table on the first `bits` bits of a
// code for the codes up to that length, the canonical order for longer ones.
class Huffman {
 public:
  static constexpr int kMaxBits = 15;
  // From the code lengths of symbols 0..n-1 (0: unused). Refuses over-subscribed
  // and incomplete sets (zlib accepts a few incomplete ones; the caller falls
  // back to zlib for those).
  bool build(const uint8_t* lengths, int n, int max_table_bits) {
    int count[kMaxBits + 1] = {};
    for (int s = 0; s < n; ++s) ++count[lengths[s]];
    count[0] = 0;
    int max_len = 0;
    int left = 1;
    for (int len = 1; len <= kMaxBits; ++len) {
      left <<= 1;
      left -= count[len];
      if (left < 0) return false;  // over-subscribed
      if (count[len]) max_len = len;
    }
    if (left != 0) return false;  // incomplete (or empty)
    std::copy(count, count + kMaxBits + 1, count_);
    int offset[kMaxBits + 2] = {};
    for (int len = 1; len <= kMaxBits; ++len) offset[len + 1] = offset[len] + count[len];
    for (int s = 0; s < n; ++s)
      if (lengths[s]) symbol_[offset[lengths[s]]++] = static_cast<uint16_t>(s);
    bits_ = std::min(max_len, max_table_bits);
    // Codes in canonical order: each code up to bits_ long fills every table slot
    // whose low bits are its bit-reversed code; a longer code marks the slot of
    // its first bits_ bits 0 (decode() then walks it). The code is complete, so
    // every slot is written one way or the other.
    uint32_t code = 0;
    int k = 0;
    for (int len = 1; len <= max_len; ++len) {
      for (int c = 0; c < count[len]; ++c, ++k, ++code) {
        const uint32_t rev = reverse_bits(code, len);
        if (len <= bits_) {
          const uint16_t entry = static_cast<uint16_t>((len << 11) | symbol_[k]);
          for (uint32_t slot = rev; slot < (1u << bits_); slot += 1u << len) table_[slot] = entry;
        } else {
          table_[rev & ((1u << bits_) - 1)] = 0;
        }
      }
      code <<= 1;
    }
    return true;
  }
  // The next symbol, or -1. REQUIRES at least 15 bits buffered.
  int decode(BitReader& br) const {
    const uint16_t e = table_[br.peek(bits_)];
    if (e) {
      br.drop(e >> 11);
      return e & 0x7ff;
    }
    // A code longer than the table: walk the canonical code a bit at a time (as
    // in Mark Adler's puff.c).
    const uint32_t bits = br.peek(kMaxBits);
    int code = 0, first = 0, index = 0;
    for (int len = 1; len <= kMaxBits; ++len) {
      code |= static_cast<int>((bits >> (len - 1)) & 1u);
      const int count = count_[len];
      if (code - count < first) {
        br.drop(len);
        return symbol_[index + (code - first)];
      }
      index += count;
      first = (first + count) << 1;
      code <<= 1;
    }
    return -1;
  }

 private:
  int bits_ = 0;
  int count_[kMaxBits + 1] = {};
  uint16_t symbol_[320] = {};
  uint16_t table_[1 << 10] = {};
};

constexpr uint16_t kLengthBase[29] = {3,  4,  5,  6,  7,  8,  9,  10, 11,  13,  15,  17,  19,  23, 27,
                                      31, 35, 43, 51, 59, 67, 83, 99, 115, 131, 163, 195, 227, 258};
constexpr uint8_t kLengthExtra[29] = {0, 0, 0, 0, 0, 0, 0, 0, 1, 1, 1, 1, 2, 2, 2,
                                      2, 3, 3, 3, 3, 4, 4, 4, 4, 5, 5, 5, 5, 0};
constexpr uint16_t kDistBase[30] = {1,   2,   3,   4,   5,   7,    9,    13,   17,   25,   33,   49,   65,    97,    129,
                                    193, 257, 385, 513, 769, 1025, 1537, 2049, 3073, 4097, 6145, 8193, 12289, 16385, 24577};
constexpr uint8_t kDistExtra[30] = {0, 0, 0, 0, 1, 1, 2, 2, 3, 3, 4, 4, 5, 5, 6,
                                    6, 7, 7, 8, 8, 9, 9, 10, 10, 11, 11, 12, 12, 13, 13};

// The fixed codes of 3.2.6. (Their literal/length code uses 288 symbols, two of
// them never valid; the distance code 32, two never valid; both are complete.)
struct FixedCodes {
  Huffman lit, dist;
  bool ok = false;
  FixedCodes() {
    uint8_t l[288];
    std::fill(l, l + 144, uint8_t{8});
    std::fill(l + 144, l + 256, uint8_t{9});
    std::fill(l + 256, l + 280, uint8_t{7});
    std::fill(l + 280, l + 288, uint8_t{8});
    uint8_t d[32];
    std::fill(d, d + 32, uint8_t{5});
    ok = lit.build(l, 288, 10) && dist.build(d, 32, 8);
  }
};

// Reads the code lengths of a dynamic block (3.2.7) and builds its two codes.
bool read_dynamic(BitReader& br, Huffman& lit, Huffman& dist) {
  br.refill();
  const int nlen = static_cast<int>(br.take(5)) + 257, ndist = static_cast<int>(br.take(5)) + 1,
            ncode = static_cast<int>(br.take(4)) + 4;
  if (nlen > 286 || ndist > 30) return false;
  static constexpr uint8_t kOrder[19] = {16, 17, 18, 0, 8, 7, 9, 6, 10, 5, 11, 4, 12, 3, 13, 2, 14, 1, 15};
  uint8_t code_lengths[19] = {};
  for (int i = 0; i < ncode; ++i) {
    if (br.buffered() < 3) br.refill();
    code_lengths[kOrder[i]] = static_cast<uint8_t>(br.take(3));
  }
  Huffman lencode;
  if (!lencode.build(code_lengths, 19, 7)) return false;
  uint8_t lengths[286 + 30];
  int i = 0;
  while (i < nlen + ndist) {
    br.refill();
    const int sym = lencode.decode(br);
    if (sym < 0) return false;
    if (sym < 16) {
      lengths[i++] = static_cast<uint8_t>(sym);
      continue;
    }
    uint8_t value = 0;
    int repeat;
    if (sym == 16) {
      if (i == 0) return false;  // nothing to repeat
      value = lengths[i - 1];
      repeat = 3 + static_cast<int>(br.take(2));
    } else if (sym == 17) {
      repeat = 3 + static_cast<int>(br.take(3));
    } else {
      repeat = 11 + static_cast<int>(br.take(7));
    }
    if (i + repeat > nlen + ndist) return false;
    std::fill_n(lengths + i, repeat, value);
    i += repeat;
  }
  if (lengths[256] == 0) return false;  // no end-of-block code
  return lit.build(lengths, nlen, 10) && dist.build(lengths + nlen, ndist, 8);
}

// Decodes one block's symbols (3.2.5) into out, from `o` on.
bool read_symbols(BitReader& br, const Huffman& lit, const Huffman& dist, uint8_t* out, size_t& o, size_t out_size) {
  for (;;) {
    br.refill();  // 56 bits: a literal/length code (15) and its extra bits (5), a distance code (15) and its (13)
    int sym = lit.decode(br);
    if (sym < 0) return false;
    if (sym < 256) {
      if (o == out_size) return false;
      out[o++] = static_cast<uint8_t>(sym);
      continue;
    }
    if (sym == 256) return true;
    sym -= 257;
    if (sym >= 29) return false;
    const size_t len = kLengthBase[sym] + br.take(kLengthExtra[sym]);
    const int dsym = dist.decode(br);
    if (dsym < 0 || dsym >= 30) return false;
    const size_t d = kDistBase[dsym] + br.take(kDistExtra[dsym]);
    if (d > o || len > out_size - o) return false;  // before the start, or past the end
    uint8_t* to = out + o;
    const uint8_t* from = to - d;
    if (d >= len) {
      std::memcpy(to, from, len);
    } else {
      for (size_t k = 0; k < len; ++k) to[k] = from[k];  // overlapping: byte by byte
    }
    o += len;
  }
}

}  // namespace

bool inflate_small(std::span<const uint8_t> in, uint8_t* out, size_t out_size) {
  static const FixedCodes fixed;
  if (!fixed.ok || in.size() < 6) return false;
  // RFC 1950: CM 8, window at most 32 KB, check bits, no preset dictionary.
  const uint8_t cmf = in[0], flg = in[1];
  if ((cmf & 15) != 8 || (cmf >> 4) > 7 || ((cmf << 8) | flg) % 31 != 0 || (flg & 0x20)) return false;
  BitReader br(in.data() + 2, in.size() - 2);
  size_t o = 0;
  Huffman lit, dist;
  for (bool last = false; !last;) {
    br.refill();
    last = br.take(1) != 0;
    const uint32_t type = br.take(2);
    if (type == 0) {  // stored (3.2.4)
      br.align();
      br.refill();
      const uint32_t len = br.take(16), nlen = br.take(16);
      if (len != (~nlen & 0xffffu) || len > out_size - o) return false;
      for (uint32_t k = 0; k < len; ++k) {
        if (br.buffered() < 8) br.refill();
        out[o++] = static_cast<uint8_t>(br.take(8));
      }
    } else if (type == 1) {
      if (!read_symbols(br, fixed.lit, fixed.dist, out, o, out_size)) return false;
    } else if (type == 2) {
      if (!read_dynamic(br, lit, dist) || !read_symbols(br, lit, dist, out, o, out_size)) return false;
    } else {
      return false;
    }
  }
  if (o != out_size) return false;
  // The Adler-32 of the data, most significant byte first, then nothing more.
  br.align();
  br.refill();
  uint32_t check = 0;
  for (int k = 0; k < 4; ++k) check = (check << 8) | br.take(8);
  if (br.consumed() != br.size()) return false;
  return check == adler32(adler32(0L, Z_NULL, 0), out, static_cast<uInt>(out_size));
}

}  // namespace tamis
