// The direct PNG path of decode.h: the common PNG (8 bits a sample; grey, RGB or
// RGBA; not interlaced; no transparency chunk) inflated (inflate.h, or zlib for
// what that declines) and unfiltered
// here (ISO/IEC 15948, clauses 9 and 10), with one zlib stream a thread kept
// between files. Anything else, and anything odd about the data, is declined and
// left to libpng (through OpenCV), which then gives the verdict.
#include <zlib.h>

#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <vector>

#include "tamis/base/byte_reader.h"
#include "decode_internal.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/decode/inflate.h"

namespace tamis {

using namespace detail;

namespace {

// A zlib inflate state (inflateInit allocates its 32 KB window; freed with it).
struct ZStream {
  z_stream z{};
  bool ok = false;
  ZStream() { ok = inflateInit(&z) == Z_OK; }
  ~ZStream() {
    if (ok) inflateEnd(&z);
  }
  ZStream(const ZStream&) = delete;
  ZStream& operator=(const ZStream&) = delete;
};

// One inflate state a thread, reset between files (the window allocated once).
class Inflater {
 public:
  // Inflates the zlib stream held in `parts`, in order, into exactly `out_size`
  // bytes. True only when the stream ends exactly there, with its checksum right,
  // and no input is left over.
  bool inflate_exact(const std::vector<Bytes>& parts, uint8_t* out, size_t out_size) {
    // Our small-stream decoder first (inflate.h): it gives zlib's bytes or
    // declines, and zlib then decides.
    if (parts.size() == 1) {
      if (inflate_small(parts[0], out, out_size)) return true;
    } else {
      joined_.clear();
      for (const auto& p : parts) joined_.insert(joined_.end(), p.begin(), p.end());
      if (inflate_small(joined_, out, out_size)) return true;
    }
    if (!zs_.ok || out_size > UINT32_MAX || inflateReset(&zs_.z) != Z_OK) return false;
    zs_.z.next_out = out;
    zs_.z.avail_out = static_cast<uInt>(out_size);
    for (size_t p = 0; p < parts.size(); ++p) {
      zs_.z.next_in = const_cast<Bytef*>(parts[p].data());
      zs_.z.avail_in = static_cast<uInt>(parts[p].size());
      while (zs_.z.avail_in > 0) {
        const uInt in_before = zs_.z.avail_in, out_before = zs_.z.avail_out;
        const int rc = inflate(&zs_.z, Z_NO_FLUSH);
        if (rc == Z_STREAM_END) return zs_.z.avail_out == 0 && zs_.z.avail_in == 0 && p + 1 == parts.size();
        if (rc != Z_OK && rc != Z_BUF_ERROR) return false;
        if (zs_.z.avail_in == in_before && zs_.z.avail_out == out_before) return false;  // output full, data left
      }
    }
    return false;  // the stream did not end
  }

 private:
  ZStream zs_;
  std::vector<uint8_t> joined_;  // the IDAT parts end to end, when there are several
};

inline uint8_t paeth(int a, int b, int c) {
  const int p = a + b - c;
  const int pa = std::abs(p - a), pb = std::abs(p - b), pc = std::abs(p - c);
  if (pa <= pb && pa <= pc) return static_cast<uint8_t>(a);
  return static_cast<uint8_t>(pb <= pc ? b : c);
}

// Undoes the filter of one row in place (bpp bytes a pixel); false for an unknown filter.
bool unfilter(uint8_t type, uint8_t* row, const uint8_t* prev, size_t n, size_t bpp) {
  switch (type) {
    case 0: return true;
    case 1:
      for (size_t i = bpp; i < n; ++i) row[i] = static_cast<uint8_t>(row[i] + row[i - bpp]);
      return true;
    case 2:
      if (prev)
        for (size_t i = 0; i < n; ++i) row[i] = static_cast<uint8_t>(row[i] + prev[i]);
      return true;
    case 3:
      for (size_t i = 0; i < n; ++i) {
        const int left = i >= bpp ? row[i - bpp] : 0, up = prev ? prev[i] : 0;
        row[i] = static_cast<uint8_t>(row[i] + ((left + up) >> 1));
      }
      return true;
    case 4:
      for (size_t i = 0; i < n; ++i) {
        const int left = i >= bpp ? row[i - bpp] : 0, up = prev ? prev[i] : 0;
        const int up_left = (prev && i >= bpp) ? prev[i - bpp] : 0;
        row[i] = static_cast<uint8_t>(row[i] + paeth(left, up, up_left));
      }
      return true;
    default: return false;
  }
}

// Samples a pixel of a PNG colour type the direct and streamed paths read
// (grey, grey+alpha, RGB, RGBA); 0 for the others (palettes).
int png_samples(ColorMode mode) {
  switch (mode) {
    case ColorMode::gray: return 1;
    case ColorMode::graya: return 2;
    case ColorMode::rgb: return 3;
    case ColorMode::rgba: return 4;
    default: return 0;
  }
}

// The IDAT chunks, which must follow one another; false when there are none, when
// they are apart, or when a tRNS chunk (which would add alpha) is present.
bool idat_parts(Bytes b, std::vector<Bytes>& idat) {
  bool idat_done = false;
  for (size_t off = 8;;) {
    auto len = be32(b, off);
    if (!len || *len > 0x7fffffffu || !has(b, off + 8, size_t{*len} + 4)) return false;
    const uint8_t* type = b.data() + off + 4;
    if (std::memcmp(type, "IDAT", 4) == 0) {
      if (idat_done) return false;
      if (*len > 0) idat.push_back(b.subspan(off + 8, *len));
    } else {
      if (!idat.empty()) idat_done = true;
      if (std::memcmp(type, "tRNS", 4) == 0) return false;
      if (std::memcmp(type, "IEND", 4) == 0) break;
    }
    off += 12 + size_t{*len};
  }
  return !idat.empty();
}

// Pulls exactly `n` bytes of the zlib stream held in `parts` into `out`,
// advancing through the parts. False when the data ends, is damaged, or the
// stream ends early.
bool pull(ZStream& zs, const std::vector<Bytes>& parts, size_t& part, uint8_t* out, size_t n, bool& ended) {
  z_stream& z = zs.z;
  z.next_out = out;
  z.avail_out = static_cast<uInt>(n);
  while (z.avail_out > 0) {
    if (ended) return false;
    if (z.avail_in == 0) {
      if (part >= parts.size()) return false;
      z.next_in = const_cast<Bytef*>(parts[part].data());
      z.avail_in = static_cast<uInt>(parts[part].size());
      ++part;
    }
    const uInt in_before = z.avail_in, out_before = z.avail_out;
    const int rc = inflate(&z, Z_NO_FLUSH);
    if (rc == Z_STREAM_END) {
      ended = true;
      continue;  // fails above unless this was the last byte wanted
    }
    if (rc != Z_OK && rc != Z_BUF_ERROR) return false;
    if (z.avail_in == in_before && z.avail_out == out_before) return false;
  }
  return true;
}

}  // namespace

uint64_t detail::png_streamed_bytes(const ProbeInfo& p, uint32_t side) {
  if (p.format != Format::png || p.interlaced || (p.bit_depth != 8 && p.bit_depth != 16)) return 0;
  const uint64_t in_ch = static_cast<uint64_t>(png_samples(p.mode));
  if (in_ch == 0) return 0;
  const uint64_t w = p.width, h = p.height, out_ch = in_ch == 1 ? 1 : in_ch == 3 ? 3 : 4;
  if (w == 0 || h == 0 || w * in_ch * (p.bit_depth / 8) + 1 > UINT32_MAX) return 0;
  const uint64_t stride = w * in_ch * (p.bit_depth / 8);
  const uint32_t k = box_factor(w, h, side);
  return 2 * (stride + 1) + w * out_ch + BoxReducer::bytes(w, h, int(out_ch), k) + (64 << 10);
}

bool detail::decode_png_streamed(std::span<const uint8_t> b, const ProbeInfo& probe, uint32_t side, Decoded& out) {
  if (png_streamed_bytes(probe, side) == 0) return false;
  std::vector<Bytes> idat;
  if (!idat_parts(b, idat)) return false;
  const int in_ch = png_samples(probe.mode);
  const int out_ch = in_ch == 1 ? 1 : in_ch == 3 ? 3 : 4;
  const size_t bps = probe.bit_depth / 8, w = probe.width, h = probe.height;
  const size_t stride = w * size_t(in_ch) * bps;
  const bool has_alpha = in_ch == 2 || in_ch == 4;
  // One pass over the rows, 16-bit samples taken to 8 bits against 65535 (deep_to_8).
  auto pass = [&]() -> bool {
    ZStream zs;
    if (!zs.ok) return false;
    std::vector<uint8_t> cur(stride + 1), prev(stride, 0), row8(w * size_t(out_ch));
    DistinctCounter distinct(65);
    uint8_t alpha_min = 255;
    BoxReducer box(probe.width, probe.height, out_ch, box_factor(w, h, side));
    size_t part = 0;
    bool ended = false;
    for (size_t y = 0; y < h; ++y) {
      if (!pull(zs, idat, part, cur.data(), stride + 1, ended)) return false;
      if (!unfilter(cur[0], cur.data() + 1, y > 0 ? prev.data() : nullptr, stride, size_t(in_ch) * bps)) return false;
      const uint8_t* s = cur.data() + 1;
      uint8_t* d = row8.data();
      auto colour = [&](size_t i) -> uint8_t {
        return bps == 1 ? s[i] : deep_to_8((unsigned{s[2 * i]} << 8) | s[2 * i + 1], 65535);  // big-endian
      };
      auto alpha = colour;
      for (size_t x = 0; x < w; ++x, d += out_ch) {
        const size_t i = x * size_t(in_ch);
        switch (in_ch) {
          case 1: d[0] = colour(i); break;
          case 2: d[0] = d[1] = d[2] = colour(i), d[3] = alpha(i + 1); break;
          case 3: d[0] = colour(i + 2), d[1] = colour(i + 1), d[2] = colour(i); break;
          default: d[0] = colour(i + 2), d[1] = colour(i + 1), d[2] = colour(i), d[3] = alpha(i + 3); break;
        }
      }
      if (!distinct.full()) distinct.add(row8.data(), w, out_ch);
      if (has_alpha) alpha_min = std::min(alpha_min, premultiply_row(row8.data(), w, 4));
      box.add_row(row8.data());
      std::memcpy(prev.data(), cur.data() + 1, stride);
    }
    // The stream must end here, with its checksum right, and hold nothing more.
    uint8_t extra = 0;
    if (!ended) {
      if (pull(zs, idat, part, &extra, 1, ended) || !ended) return false;
      if (zs.z.avail_out != 1) return false;
    }
    if (zs.z.avail_in != 0 || part != idat.size()) return false;
    out.defect = Defect::none;
    out.reduced = flatten_alpha(area_reduce(box.take(), side));
    out.alpha_min = alpha_min;
    out.distinct = static_cast<uint8_t>(distinct.count());
    return true;
  };
  return pass();
}

bool decode_png_direct(std::span<const uint8_t> b, const ProbeInfo& probe, cv::Mat& out) {
  if (probe.format != Format::png || probe.bit_depth != 8 || probe.interlaced) return false;
  const size_t channels = static_cast<size_t>(png_samples(probe.mode));
  if (channels == 0 || channels == 2) return false;  // grey+alpha: libpng (OpenCV gives it as BGRA)
  const size_t w = probe.width, h = probe.height;
  if (w == 0 || h == 0 || w > (1u << 24) / channels || h > (1u << 24)) return false;
  if (uint64_t{h} * (w * channels + 1) > (uint64_t{1} << 31)) return false;  // huge: libpng (and its limits) decide
  std::vector<Bytes> idat;
  if (!idat_parts(b, idat)) return false;
  const size_t stride = w * channels;
  thread_local std::vector<uint8_t> raw;
  struct Release {  // a large image's rows are not kept for the thread's lifetime
    std::vector<uint8_t>& v;
    ~Release() {
      if (v.capacity() > (size_t{8} << 20)) std::vector<uint8_t>().swap(v);
    }
  } release{raw};
  raw.resize(h * (stride + 1));
  thread_local Inflater inflater;
  if (!inflater.inflate_exact(idat, raw.data(), raw.size())) return false;
  for (size_t y = 0; y < h; ++y) {
    uint8_t* row = raw.data() + y * (stride + 1);
    const uint8_t* prev = y > 0 ? raw.data() + (y - 1) * stride : nullptr;  // the previous row, unfiltered and moved
    if (!unfilter(row[0], row + 1, prev, stride, channels)) return false;
    // Shift the pixels left over the filter byte, so rows lie end to end.
    std::memmove(raw.data() + y * stride, row + 1, stride);
  }
  out.create(static_cast<int>(h), static_cast<int>(w), CV_8UC(static_cast<int>(channels)));
  for (size_t y = 0; y < h; ++y) {
    const uint8_t* s = raw.data() + y * stride;
    uint8_t* d = out.ptr<uint8_t>(static_cast<int>(y));
    if (channels == 1) {
      std::memcpy(d, s, stride);
    } else {  // RGB(A) as stored; OpenCV's order is BGR(A)
      for (size_t x = 0; x < w; ++x, s += channels, d += channels) {
        d[0] = s[2];
        d[1] = s[1];
        d[2] = s[0];
        if (channels == 4) d[3] = s[3];
      }
    }
  }
  return true;
}

}  // namespace tamis
