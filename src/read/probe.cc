#include "tamis/read/probe.h"

#include <zlib.h>

#include <algorithm>
#include <array>
#include <cctype>
#include <set>
#include <string>

#include "tamis/base/byte_reader.h"
#include "tamis/read/decode/pnm_header.h"
#include "tamis/read/exif.h"
#include "tamis/read/jpeg_quality.h"

namespace tamis {

using namespace detail;

namespace {

constexpr uint32_t kMaxDimension = 1u << 30;  // any side claimed beyond this is a bad header

void take_exif(ProbeInfo& info, Bytes tiff) {
  if (info.has_exif) return;  // the first EXIF block wins
  ExifFacts f = read_exif(tiff);
  if (!f.valid) return;
  info.has_exif = true;
  info.orientation = f.orientation;
  info.has_gps = f.gps_position;
}

bool sane_size(uint64_t w, uint64_t h) { return w > 0 && h > 0 && w <= kMaxDimension && h <= kMaxDimension; }

// ---------------------------------------------------------------- PNG
// ISO/IEC 15948 (PNG): signature, then chunks of length/type/data/CRC.
ProbeOutcome probe_png(Bytes b) {
  ProbeOutcome out;
  out.info.format = Format::png;
  size_t off = 8;
  bool first = true;
  while (true) {
    auto len = be32(b, off);
    if (!len) {
      out.defect = Defect::truncated;  // no IEND
      return out;
    }
    if (*len > 0x7fffffffu) {
      out.defect = Defect::bad_header;
      return out;
    }
    if (!has(b, off + 8, size_t{*len} + 4)) {
      out.defect = Defect::truncated;
      return out;
    }
    const uint8_t* type = b.data() + off + 4;
    Bytes data = b.subspan(off + 8, *len);
    uint32_t stored_crc = *be32(b, off + 8 + *len);
    uint32_t crc = static_cast<uint32_t>(crc32(0L, type, 4));
    if (*len > 0) crc = static_cast<uint32_t>(crc32(crc, data.data(), static_cast<uInt>(data.size())));
    if (crc != stored_crc) {
      out.defect = Defect::bad_checksum;
      return out;
    }
    auto is = [&](const char* t) { return std::memcmp(type, t, 4) == 0; };
    if (first) {
      if (!is("IHDR") || *len != 13) {
        out.defect = Defect::bad_header;
        return out;
      }
      uint32_t w = *be32(data, 0), h = *be32(data, 4);
      uint8_t depth = data[8], ct = data[9], interlace = data[12];
      bool ok_depth = false;
      switch (ct) {
        case 0: out.info.mode = ColorMode::gray; ok_depth = depth == 1 || depth == 2 || depth == 4 || depth == 8 || depth == 16; break;
        case 2: out.info.mode = ColorMode::rgb; ok_depth = depth == 8 || depth == 16; break;
        case 3: out.info.mode = ColorMode::palette; ok_depth = depth == 1 || depth == 2 || depth == 4 || depth == 8; break;
        case 4: out.info.mode = ColorMode::graya; ok_depth = depth == 8 || depth == 16; break;
        case 6: out.info.mode = ColorMode::rgba; ok_depth = depth == 8 || depth == 16; break;
        default: break;
      }
      out.info.width = w;
      out.info.height = h;
      out.info.bit_depth = depth;
      out.info.interlaced = interlace == 1;
      if (!ok_depth || !sane_size(w, h) || interlace > 1) {
        out.defect = Defect::bad_header;
        return out;
      }
      first = false;
    } else if (is("acTL") && *len >= 8) {
      out.info.frames = std::max<uint32_t>(1, *be32(data, 0));
    } else if (is("eXIf")) {
      take_exif(out.info, data);
    } else if (is("IEND")) {
      return out;
    }
    off += 12 + size_t{*len};
  }
}

// ---------------------------------------------------------------- JPEG
// ITU-T T.81 (JPEG) marker chain; EXIF in APP1, Adobe colour transform in APP14.
bool is_sof(uint8_t m) {
  return (m >= 0xC0 && m <= 0xCF) && m != 0xC4 && m != 0xC8 && m != 0xCC;
}

ProbeOutcome probe_jpeg(Bytes b) {
  ProbeOutcome out;
  out.info.format = Format::jpeg;
  size_t off = 2;
  bool have_sof = false;
  int components = 0;
  while (true) {
    // Find the next marker: 0xFF, any fill bytes 0xFF, then the code.
    if (!has(b, off, 2)) {
      out.defect = Defect::truncated;  // ran out before EOI
      return out;
    }
    if (b[off] != 0xFF) {
      out.defect = Defect::bad_header;
      return out;
    }
    while (has(b, off + 1, 1) && b[off + 1] == 0xFF) ++off;
    if (!has(b, off + 1, 1)) {
      out.defect = Defect::truncated;
      return out;
    }
    uint8_t m = b[off + 1];
    off += 2;
    if (m == 0xD9) {  // EOI
      if (!have_sof) out.defect = Defect::bad_header;
      return out;
    }
    if (m == 0x01 || (m >= 0xD0 && m <= 0xD7)) continue;  // no length
    if (m == 0xD8 || m == 0x00) {
      out.defect = Defect::bad_header;
      return out;
    }
    auto len = be16(b, off);
    if (!len) {
      out.defect = Defect::truncated;
      return out;
    }
    if (*len < 2) {
      out.defect = Defect::bad_header;
      return out;
    }
    if (!has(b, off, *len)) {
      out.defect = Defect::truncated;
      return out;
    }
    Bytes seg = b.subspan(off + 2, *len - 2u);
    if (m == 0xDB) {  // DQT: tables of 64 steps in zigzag order, 8 or 16 bits each; table 0 is the luminance's
      size_t at = 0;
      while (at < seg.size()) {
        const int precision = seg[at] >> 4, id = seg[at] & 15;
        const size_t bytes = precision == 0 ? 64 : 128;
        if (precision > 1 || at + 1 + bytes > seg.size()) break;  // the decoder judges a malformed table
        if (id == 0) {
          uint16_t table[64];
          for (size_t z = 0; z < 64; ++z)
            table[kZigzagToNatural[z]] = precision == 0 ? seg[at + 1 + z]
                                                        : static_cast<uint16_t>(seg[at + 1 + 2 * z] << 8 | seg[at + 2 + 2 * z]);
          out.info.jpeg_quality = jpeg_quality_of_table(table);
        }
        at += 1 + bytes;
      }
    } else if (m == 0xE1 && starts_with(seg, 0, "Exif\0\0", 6)) {
      take_exif(out.info, seg.subspan(6));
    } else if (m == 0xEE && starts_with(seg, 0, "Adobe", 5) && seg.size() >= 12) {
      // transform byte: 0 = none (CMYK/RGB), 1 = YCbCr, 2 = YCCK; 4 components are CMYK either way
    } else if (is_sof(m) && !have_sof) {
      if (seg.size() < 6) {
        out.defect = Defect::bad_header;
        return out;
      }
      out.info.bit_depth = seg[0];
      out.info.height = *be16(seg, 1);
      out.info.width = *be16(seg, 3);
      components = seg[5];
      out.info.interlaced = m == 0xC2 || m == 0xC6 || m == 0xCA || m == 0xCE;
      out.info.mode = components == 1   ? ColorMode::gray
                      : components == 3 ? ColorMode::rgb
                      : components == 4 ? ColorMode::cmyk
                                        : ColorMode::unknown;
      have_sof = true;
      if (!sane_size(out.info.width, out.info.height) || out.info.mode == ColorMode::unknown ||
          (out.info.bit_depth != 8 && out.info.bit_depth != 12 && out.info.bit_depth != 16)) {
        out.defect = Defect::bad_header;
        return out;
      }
    }
    off += *len;
    if (m == 0xDA) {  // SOS: skip entropy-coded data up to the next real marker
      if (!have_sof) {
        out.defect = Defect::bad_header;
        return out;
      }
      while (true) {
        const void* p = off < b.size() ? std::memchr(b.data() + off, 0xFF, b.size() - off) : nullptr;
        if (!p) {
          out.defect = Defect::truncated;
          return out;
        }
        off = static_cast<size_t>(static_cast<const uint8_t*>(p) - b.data());
        if (!has(b, off, 2)) {
          out.defect = Defect::truncated;
          return out;
        }
        uint8_t n = b[off + 1];
        if (n == 0x00 || (n >= 0xD0 && n <= 0xD7)) {
          off += 2;  // stuffed byte or restart marker: still scan data
        } else if (n == 0xFF) {
          off += 1;  // fill byte before a marker
        } else {
          break;  // a marker: back to the chain
        }
      }
    }
  }
}

// ---------------------------------------------------------------- GIF
// GIF89a specification: header, logical screen, blocks up to the trailer 0x3B.
// Skips a chain of data sub-blocks; false when it runs off the end.
bool skip_sub_blocks(Bytes b, size_t& off) {
  while (true) {
    if (!has(b, off, 1)) return false;
    uint8_t n = b[off];
    off += 1;
    if (n == 0) return true;
    if (!has(b, off, n)) return false;
    off += n;
  }
}

ProbeOutcome probe_gif(Bytes b) {
  ProbeOutcome out;
  out.info.format = Format::gif;
  out.info.mode = ColorMode::palette;
  out.info.bit_depth = 8;
  out.info.frames = 0;
  if (!has(b, 0, 13)) {
    out.defect = Defect::truncated;
    return out;
  }
  out.info.width = *le16(b, 6);
  out.info.height = *le16(b, 8);
  uint8_t packed = b[10];
  size_t off = 13;
  if (packed & 0x80) off += 3u * (1u << ((packed & 7) + 1));
  if (!sane_size(out.info.width, out.info.height)) {
    out.defect = Defect::bad_header;
    return out;
  }
  while (true) {
    if (!has(b, off, 1)) {
      out.defect = Defect::truncated;
      break;
    }
    uint8_t tag = b[off];
    if (tag == 0x3B) break;  // trailer
    if (tag == 0x21) {       // extension: label then sub-blocks
      off += 2;
      if (!skip_sub_blocks(b, off)) {
        out.defect = Defect::truncated;
        break;
      }
    } else if (tag == 0x2C) {  // image descriptor
      if (!has(b, off, 10)) {
        out.defect = Defect::truncated;
        break;
      }
      uint8_t ipacked = b[off + 9];
      if (out.info.frames == 0) out.info.interlaced = (ipacked & 0x40) != 0;
      off += 10;
      if (ipacked & 0x80) off += 3u * (1u << ((ipacked & 7) + 1));
      off += 1;  // LZW minimum code size
      if (!skip_sub_blocks(b, off)) {
        out.defect = Defect::truncated;
        break;
      }
      ++out.info.frames;
    } else {
      out.defect = Defect::bad_header;
      break;
    }
  }
  if (out.defect == Defect::none && out.info.frames == 0) out.defect = Defect::bad_header;
  out.info.frames = std::max<uint32_t>(out.info.frames, 1);
  return out;
}

// ---------------------------------------------------------------- BMP
// Windows BITMAPFILEHEADER + BITMAPCOREHEADER / BITMAPINFOHEADER (and V2..V5).
ProbeOutcome probe_bmp(Bytes b) {
  ProbeOutcome out;
  out.info.format = Format::bmp;
  auto data_off = le32(b, 10);
  auto dib = le32(b, 14);
  if (!data_off || !dib) {
    out.defect = Defect::truncated;
    return out;
  }
  int64_t w = 0, h = 0;
  uint32_t bpp = 0, compression = 0, alpha_mask = 0;
  if (*dib == 12) {
    if (!has(b, 14, 12)) {
      out.defect = Defect::truncated;
      return out;
    }
    w = *le16(b, 18);
    h = *le16(b, 20);
    bpp = *le16(b, 24);
  } else if (*dib >= 40 && *dib <= 124) {
    if (!has(b, 14, *dib)) {
      out.defect = Defect::truncated;
      return out;
    }
    w = static_cast<int32_t>(*le32(b, 18));
    h = static_cast<int32_t>(*le32(b, 22));
    bpp = *le16(b, 28);
    compression = *le32(b, 30);
    if (*dib >= 56) alpha_mask = *le32(b, 14 + 52);
  } else {
    out.defect = Defect::bad_header;
    return out;
  }
  if (h < 0) h = -h;
  out.info.width = static_cast<uint32_t>(std::clamp<int64_t>(w, 0, 0xffffffff));
  out.info.height = static_cast<uint32_t>(std::clamp<int64_t>(h, 0, 0xffffffff));
  switch (bpp) {
    case 1: case 2: case 4: case 8: out.info.mode = ColorMode::palette; out.info.bit_depth = static_cast<uint8_t>(bpp); break;
    case 16: out.info.mode = ColorMode::rgb; out.info.bit_depth = 5; break;
    case 24: out.info.mode = ColorMode::rgb; out.info.bit_depth = 8; break;
    case 32: out.info.mode = alpha_mask ? ColorMode::rgba : ColorMode::rgb; out.info.bit_depth = 8; break;
    default: out.defect = Defect::bad_header; return out;
  }
  if (w <= 0 || !sane_size(out.info.width, out.info.height)) {
    out.defect = Defect::bad_header;
    return out;
  }
  if (compression == 0 || compression == 3) {  // uncompressed rows: length is known
    uint64_t stride = ((uint64_t(w) * bpp + 31) / 32) * 4;
    if (uint64_t(*data_off) + stride * uint64_t(h) > b.size()) out.defect = Defect::truncated;
  } else if (!has(b, *data_off, 1)) {
    out.defect = Defect::truncated;
  }
  return out;
}

// ---------------------------------------------------------------- WebP
// RIFF container (Google's WebP container specification): VP8, VP8L, VP8X chunks.
ProbeOutcome probe_webp(Bytes b) {
  ProbeOutcome out;
  out.info.format = Format::webp;
  out.info.bit_depth = 8;
  auto riff = le32(b, 4);
  if (!riff || !has(b, 0, 12)) {
    out.defect = Defect::truncated;
    return out;
  }
  size_t end = size_t{*riff} + 8;
  bool truncated = end > b.size();
  end = std::min(end, b.size());
  size_t off = 12;
  bool vp8x = false, alpha = false, have_image = false;
  uint32_t frames = 0;
  while (off + 8 <= end) {
    uint32_t size = *le32(b, off + 4);
    size_t data_off = off + 8;
    if (size > end - data_off) {
      truncated = true;
      break;
    }
    Bytes data = b.subspan(data_off, size);
    auto is = [&](const char* t) { return std::memcmp(b.data() + off, t, 4) == 0; };
    if (is("VP8X") && size >= 10) {
      vp8x = true;
      alpha = (data[0] & 0x10) != 0;
      out.info.width = *le24(data, 4) + 1;
      out.info.height = *le24(data, 7) + 1;
    } else if (is("VP8 ") && size >= 10) {
      if (!(data[3] == 0x9d && data[4] == 0x01 && data[5] == 0x2a)) {
        out.defect = Defect::bad_header;
        return out;
      }
      if (!vp8x) {
        out.info.width = *le16(data, 6) & 0x3fff;
        out.info.height = *le16(data, 8) & 0x3fff;
      }
      have_image = true;
    } else if (is("VP8L") && size >= 5) {
      if (data[0] != 0x2f) {
        out.defect = Defect::bad_header;
        return out;
      }
      uint32_t bits = *le32(data, 1);
      if (!vp8x) {
        out.info.width = (bits & 0x3fff) + 1;
        out.info.height = ((bits >> 14) & 0x3fff) + 1;
      }
      alpha = alpha || ((bits >> 28) & 1);
      have_image = true;
    } else if (is("ALPH")) {
      alpha = true;
    } else if (is("ANMF")) {
      ++frames;
      have_image = true;
    } else if (is("EXIF")) {
      take_exif(out.info, starts_with(data, 0, "Exif\0\0", 6) ? data.subspan(6) : data);
    }
    off = data_off + size + (size & 1);
  }
  out.info.mode = alpha ? ColorMode::rgba : ColorMode::rgb;
  out.info.frames = std::max<uint32_t>(frames, 1);
  if (truncated) {
    out.defect = Defect::truncated;
  } else if (!have_image || !sane_size(out.info.width, out.info.height)) {
    out.defect = Defect::bad_header;
  }
  return out;
}

// ---------------------------------------------------------------- TIFF
// TIFF 6.0: byte order, IFD chain; IFD0 describes the first image.
struct IfdEntry {
  uint16_t tag, type;
  uint32_t count, value_off;  // value_off: where the value (or the pointer to it) sits
};

std::optional<uint32_t> tiff_value(Bytes b, const IfdEntry& e, bool little, uint32_t index = 0) {
  size_t unit = e.type == 3 ? 2 : e.type == 4 ? 4 : e.type == 1 ? 1 : 0;
  if (unit == 0 || index >= e.count) return std::nullopt;
  size_t total = unit * e.count;
  size_t base = e.value_off;
  if (total > 4) {
    auto p = rd32(b, e.value_off, little);
    if (!p) return std::nullopt;
    base = *p;
  }
  size_t at = base + unit * index;
  if (unit == 1) return has(b, at, 1) ? std::optional<uint32_t>(b[at]) : std::nullopt;
  if (unit == 2) {
    auto v = rd16(b, at, little);
    return v ? std::optional<uint32_t>(*v) : std::nullopt;
  }
  return rd32(b, at, little);
}

ProbeOutcome probe_tiff(Bytes b) {
  ProbeOutcome out;
  out.info.format = Format::tiff;
  bool little = b[0] == 'I';
  auto ifd = rd32(b, 4, little);
  if (!ifd) {
    out.defect = Defect::truncated;
    return out;
  }
  // Count the IFD chain (pages), guarding against loops.
  std::set<uint32_t> seen;
  uint32_t pages = 0;
  uint32_t first = *ifd;
  for (uint32_t at = first; at != 0 && pages < 100000 && seen.insert(at).second;) {
    auto n = rd16(b, at, little);
    if (!n || !has(b, at + 2, size_t{*n} * 12 + 4)) {
      if (pages == 0) {
        out.defect = Defect::truncated;
        return out;
      }
      break;
    }
    ++pages;
    at = *rd32(b, at + 2 + size_t{*n} * 12, little);
  }
  out.info.frames = std::max<uint32_t>(pages, 1);
  uint16_t n = *rd16(b, first, little);
  uint32_t photometric = 99, spp = 1, bps = 1;
  std::optional<IfdEntry> offsets, counts;
  for (uint32_t i = 0; i < n; ++i) {
    size_t e = first + 2 + size_t{i} * 12;
    IfdEntry en{*rd16(b, e, little), *rd16(b, e + 2, little), *rd32(b, e + 4, little),
                static_cast<uint32_t>(e + 8)};
    // An out-of-line value (more than 4 bytes) must lie inside the file.
    static constexpr uint8_t kTypeSize[13] = {0, 1, 1, 2, 4, 8, 1, 1, 2, 4, 8, 4, 8};
    uint64_t value_bytes = en.type < 13 ? uint64_t{kTypeSize[en.type]} * en.count : 0;
    if (value_bytes > 4) {
      auto at = rd32(b, en.value_off, little);
      if (!at || uint64_t{*at} + value_bytes > b.size()) {
        out.defect = Defect::truncated;
        return out;
      }
    }
    auto v = tiff_value(b, en, little);
    switch (en.tag) {
      case 256: out.info.width = v.value_or(0); break;
      case 257: out.info.height = v.value_or(0); break;
      case 258: bps = v.value_or(1); break;
      case 262: photometric = v.value_or(99); break;
      case 277: spp = v.value_or(1); break;
      case 273: case 324: offsets = en; break;
      case 279: case 325: counts = en; break;
      default: break;
    }
  }
  take_exif(out.info, b);
  out.info.bit_depth = static_cast<uint8_t>(std::min<uint32_t>(bps, 255));
  switch (photometric) {
    case 0: case 1: out.info.mode = spp >= 2 ? ColorMode::graya : ColorMode::gray; break;
    case 2: case 6: out.info.mode = spp >= 4 ? ColorMode::rgba : ColorMode::rgb; break;
    case 3: out.info.mode = ColorMode::palette; break;
    case 5: out.info.mode = ColorMode::cmyk; break;
    default: out.info.mode = spp >= 3 ? ColorMode::rgb : ColorMode::gray; break;
  }
  if (!sane_size(out.info.width, out.info.height) || bps == 0 || bps > 64) {
    out.defect = Defect::bad_header;
    return out;
  }
  if (offsets && counts && offsets->count == counts->count && offsets->count <= 1000000) {
    for (uint32_t i = 0; i < offsets->count; ++i) {
      auto o = tiff_value(b, *offsets, little, i);
      auto c = tiff_value(b, *counts, little, i);
      if (!o || !c || uint64_t(*o) + *c > b.size()) {
        out.defect = Defect::truncated;
        return out;
      }
    }
  }
  return out;
}

// ---------------------------------------------------------------- PNM / PAM
// Netpbm formats (read/decode/pnm_header.h reads the header).
uint8_t bits_for_maxval(uint64_t maxval) {
  uint8_t bits = 1;
  while (bits < 16 && (uint64_t{1} << bits) - 1 < maxval) ++bits;
  return bits;
}

ProbeOutcome probe_pnm(Bytes b) {
  ProbeOutcome out;
  out.info.format = Format::pnm;
  const PnmHeader ph = read_pnm_header(b);
  if (ph.status != PnmHeader::Status::ok) {
    out.defect = ph.status == PnmHeader::Status::truncated ? Defect::truncated : Defect::bad_header;
    return out;
  }
  const char kind = ph.kind;
  const uint64_t w = ph.width, h = ph.height, maxval = ph.maxval, depth = ph.depth;
  out.info.width = static_cast<uint32_t>(std::min<uint64_t>(w, 0xffffffff));
  out.info.height = static_cast<uint32_t>(std::min<uint64_t>(h, 0xffffffff));
  out.info.bit_depth = (kind == '1' || kind == '4') ? 1 : bits_for_maxval(maxval);
  out.info.mode = depth == 1   ? ColorMode::gray
                  : depth == 2 ? ColorMode::graya
                  : depth == 3 ? ColorMode::rgb
                  : depth == 4 ? ColorMode::rgba
                               : ColorMode::unknown;
  if (!sane_size(w, h) || maxval == 0 || maxval > 65535 || out.info.mode == ColorMode::unknown) {
    out.defect = Defect::bad_header;
    return out;
  }
  uint64_t need = 0;
  if (kind == '4') need = ((w + 7) / 8) * h;
  if (kind == '5' || kind == '6' || kind == '7') need = w * h * depth * (maxval > 255 ? 2 : 1);
  if (need > 0 && b.size() - ph.data_at < need) out.defect = Defect::truncated;
  return out;
}

std::string lower_extension(std::string_view path) {
  auto slash = path.rfind('/');
  auto name = slash == std::string_view::npos ? path : path.substr(slash + 1);
  auto dot = name.rfind('.');
  if (dot == std::string_view::npos || dot == 0) return {};
  std::string ext(name.substr(dot + 1));
  for (auto& ch : ext) ch = static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
  return ext;
}

}  // namespace

ProbeOutcome probe_bytes(std::span<const uint8_t> b) {
  if (starts_with(b, 0, "\x89PNG\r\n\x1a\n", 8)) return probe_png(b);
  if (has(b, 0, 3) && b[0] == 0xFF && b[1] == 0xD8 && b[2] == 0xFF) return probe_jpeg(b);
  if (starts_with(b, 0, "GIF87a", 6) || starts_with(b, 0, "GIF89a", 6)) return probe_gif(b);
  if (starts_with(b, 0, "BM", 2) && has(b, 0, 18)) return probe_bmp(b);
  if (starts_with(b, 0, "RIFF", 4) && starts_with(b, 8, "WEBP", 4)) return probe_webp(b);
  if (starts_with(b, 0, "II*\0", 4) || starts_with(b, 0, "MM\0*", 4)) return probe_tiff(b);
  if (has(b, 0, 3) && b[0] == 'P' && b[1] >= '1' && b[1] <= '7' && std::isspace(b[2])) return probe_pnm(b);
  ProbeOutcome out;
  out.defect = Defect::unknown_format;
  return out;
}

Format format_from_extension(std::string_view path) {
  static const std::array<std::pair<const char*, Format>, 16> table{{
      {"png", Format::png}, {"apng", Format::png}, {"jpg", Format::jpeg}, {"jpeg", Format::jpeg},
      {"jpe", Format::jpeg}, {"jfif", Format::jpeg}, {"gif", Format::gif}, {"bmp", Format::bmp},
      {"dib", Format::bmp}, {"webp", Format::webp}, {"tif", Format::tiff}, {"tiff", Format::tiff},
      {"pbm", Format::pnm}, {"pgm", Format::pnm}, {"ppm", Format::pnm}, {"pnm", Format::pnm},
  }};
  std::string ext = lower_extension(path);
  if (ext == "pam") return Format::pnm;
  for (const auto& [e, f] : table)
    if (ext == e) return f;
  return Format::unknown;
}

bool has_other_image_extension(std::string_view path) {
  static const std::array<const char*, 14> others{"heic", "heif", "avif", "jxl", "jp2", "j2k", "exr",
                                                  "hdr", "ico", "psd", "dng", "cr2", "nef", "arw"};
  std::string ext = lower_extension(path);
  return std::find(others.begin(), others.end(), ext) != others.end();
}

}  // namespace tamis
