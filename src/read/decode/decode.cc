#include "tamis/read/decode/decode.h"

#include <climits>
#include <cmath>
#include <csetjmp>
#include <cstdio>

#include <jpeglib.h>
#include <jerror.h>

#include <algorithm>
#include <memory>
#include <mutex>
#include <vector>

#include <opencv2/core/utils/logger.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "tamis/base/byte_reader.h"
#include "decode_internal.h"
#include "tamis/read/decode/codecs.h"
#include "tamis/read/decode/pnm_header.h"

namespace tamis {

using namespace detail;

cv::Mat detail::area_reduce(const cv::Mat& m, uint32_t side) {
  int shorter = std::min(m.cols, m.rows);
  if (shorter <= static_cast<int>(side) * 2) return m;
  double f = static_cast<double>(side) / shorter;
  cv::Mat out;
  cv::resize(m, out, cv::Size(std::max(1, int(m.cols * f + 0.5)), std::max(1, int(m.rows * f + 0.5))), 0, 0,
             cv::INTER_AREA);
  return out;
}

cv::Mat detail::flatten_alpha(const cv::Mat& m) {
  const int ch = m.channels();
  if (ch != 2 && ch != 4) return m;
  // The spread of the grey levels over each ground: over black the premultiplied
  // luma p, over white p + 255 - a (BT.601 weights; only to choose the ground).
  double sw = 0, sww = 0, sb = 0, sbb = 0;
  for (int y = 0; y < m.rows; ++y) {
    const uint8_t* s = m.ptr<uint8_t>(y);
    for (int x = 0; x < m.cols; ++x, s += ch) {
      const double p = ch == 2 ? s[0] : 0.114 * s[0] + 0.587 * s[1] + 0.299 * s[2];
      const double w = p + 255.0 - s[ch - 1];
      sb += p, sbb += p * p, sw += w, sww += w * w;
    }
  }
  const double n = std::max<double>(1.0, double(m.total()));
  const double sd_white = std::sqrt(std::max(0.0, sww / n - (sw / n) * (sw / n)));
  const double sd_black = std::sqrt(std::max(0.0, sbb / n - (sb / n) * (sb / n)));
  const bool black = sd_white < kHiddenOnWhite && sd_black >= kShownOnBlack;
  cv::Mat out(m.rows, m.cols, CV_8UC(ch - 1));
  for (int y = 0; y < m.rows; ++y) {
    const uint8_t* s = m.ptr<uint8_t>(y);
    uint8_t* d = out.ptr<uint8_t>(y);
    for (int x = 0; x < m.cols; ++x, s += ch, d += ch - 1) {
      const int ground = black ? 0 : 255 - s[ch - 1];
      for (int c = 0; c < ch - 1; ++c) d[c] = static_cast<uint8_t>(std::min(255, s[c] + ground));
    }
  }
  return out;
}

namespace {

// Samples to 8 bits against `top`, the largest value the format gives a sample
// (decode_internal.h deep_to_8): 65535 for 16-bit PNG and TIFF (Deep samples),
// 255 for 8-bit ones (left as they are), a PNM's maxval (Netpbm: OpenCV passes
// PNM samples on unscaled, so a PGM of maxval 1, 3 or 1023 is taken down against
// that maxval, every channel, a PAM's alpha too, as Pillow scales PGM and PPM;
// samples above maxval count as maxval). Other depths: OpenCV's conversion.
cv::Mat to_8bit(const cv::Mat& m, uint32_t top) {
  if (m.depth() == CV_8U && top == 255) return m;
  if (m.depth() == CV_8U || m.depth() == CV_16U) {
    cv::Mat out(m.rows, m.cols, CV_8UC(m.channels()));
    const size_t n = size_t(m.cols) * size_t(m.channels());
    for (int y = 0; y < m.rows; ++y) {
      uint8_t* d = out.ptr<uint8_t>(y);
      if (m.depth() == CV_8U) {
        const uint8_t* s = m.ptr<uint8_t>(y);
        for (size_t i = 0; i < n; ++i) d[i] = deep_to_8(s[i], top);
      } else {
        const uint16_t* s = m.ptr<uint16_t>(y);
        for (size_t i = 0; i < n; ++i) d[i] = deep_to_8(s[i], top);
      }
    }
    return out;
  }
  cv::Mat out;
  double scale = m.depth() == CV_16S ? 1.0 / 128.0 : 255.0;
  m.convertTo(out, CV_8U, scale);
  return out;
}

// Whole-block means first for a large image, then the area resize (decode.h).
cv::Mat reduce(const cv::Mat& m, const DecodeLimits& limits) {
  const uint32_t side = limits.reduced_side;
  if (uint64_t(m.total()) <= limits.block_above_pixels) return area_reduce(m, side);
  const uint32_t k = box_factor(uint64_t(m.cols), uint64_t(m.rows), side);
  if (k == 1) return area_reduce(m, side);
  BoxReducer box(uint32_t(m.cols), uint32_t(m.rows), m.channels(), k);
  for (int y = 0; y < m.rows; ++y) box.add_row(m.ptr<uint8_t>(y));
  return area_reduce(box.take(), side);
}

// The smallest DCT scale num/8 whose shorter side still reaches `side` (sizes
// round up, as libjpeg's output dimensions do); 8 when none does.
unsigned jpeg_scale_num(uint32_t w, uint32_t h, uint32_t side) {
  const uint32_t shorter = std::min(w, h);
  for (unsigned n = 1; n < 8; ++n)
    if ((uint64_t{shorter} * n + 7) / 8 >= side) return n;
  return 8;
}

// The bytes of a JPEG's output at scale num/8 (sizes round up, as libjpeg's
// do), `comps` bytes a pixel.
uint64_t jpeg_output_bytes(uint64_t w, uint64_t h, uint64_t num, uint64_t comps) {
  return ((w * num + 7) / 8) * ((h * num + 7) / 8) * comps;
}

// libjpeg's error handling: errors and corrupt-data warnings both end the decode
// (longjmp back to jpeg_decode_scaled), so a damaged JPEG is reported rather than
// passed on grey-filled.
struct JpegError {
  jpeg_error_mgr mgr;
  jmp_buf jump;
  bool warning = false;
  bool over_budget = false;  // the scaled output alone would not fit in the budget
};

[[noreturn]] void jpeg_on_error(j_common_ptr c) {
  auto* e = reinterpret_cast<JpegError*>(c->err);
  longjmp(e->jump, 1);
}

void jpeg_on_message(j_common_ptr c, int level) {
  auto* e = reinterpret_cast<JpegError*>(c->err);
  if (level < 0) {  // a corrupt-data warning: stop here
    e->warning = true;
    longjmp(e->jump, 1);
  }
}

void jpeg_silent(j_common_ptr) {}

// Errors that a valid file of a variant this libjpeg does not implement raises
// (12-bit samples, lossless or hierarchical JPEG, ...), as opposed to damage.
bool unsupported_variant(int code) {
  switch (code) {
    case JERR_BAD_PRECISION:
    case JERR_SOF_UNSUPPORTED:
    case JERR_NOTIMPL:
    case JERR_FRACT_SAMPLE_NOTIMPL:
    case JERR_ARITH_NOTIMPL:
    case JERR_CCIR601_NOTIMPL:
    case JERR_CONVERSION_NOTIMPL:
      return true;
    default:
      return false;
  }
}

struct JpegDecompressor {
  jpeg_decompress_struct cinfo{};
  JpegError err;
  JpegDecompressor() {
    cinfo.err = jpeg_std_error(&err.mgr);
    err.mgr.error_exit = jpeg_on_error;
    err.mgr.emit_message = jpeg_on_message;
    err.mgr.output_message = jpeg_silent;
    jpeg_create_decompress(&cinfo);
  }
  ~JpegDecompressor() { jpeg_destroy_decompress(&cinfo); }
  JpegDecompressor(const JpegDecompressor&) = delete;
  JpegDecompressor& operator=(const JpegDecompressor&) = delete;
};

// The libjpeg calls, at the smallest DCT scale (n/8) whose shorter side still
// reaches the wanted side; false when libjpeg gave up (dec.err says why). Every
// object that outlives a longjmp is the caller's (this frame's locals are plain
// values set before any libjpeg call or not read after a jump).
bool jpeg_decode_scaled(JpegDecompressor& dec, Bytes b, const DecodeLimits& limits, cv::Mat& m, unsigned& num) {
  jpeg_decompress_struct& ci = dec.cinfo;
  if (setjmp(dec.err.jump)) return false;
  jpeg_mem_src(&ci, b.data(), static_cast<unsigned long>(b.size()));
  jpeg_read_header(&ci, TRUE);
  num = jpeg_scale_num(ci.image_width, ci.image_height, limits.reduced_side);
  ci.scale_num = num;
  ci.scale_denom = 8;
  // The budget: the scaled output (and its BGR copy for CMYK) is ours, the rest is
  // libjpeg's, which it enforces itself: a progressive or multi-scan JPEG whose
  // coefficient arrays do not fit fails with JERR_NO_BACKING_STORE.
  const uint64_t comps = ci.num_components == 1 ? 1 : ci.num_components == 4 ? 7 : 3;
  const uint64_t ours = jpeg_output_bytes(ci.image_width, ci.image_height, num, comps);
  if (ours >= limits.max_image_bytes) {
    dec.err.over_budget = true;
    return false;
  }
  ci.mem->max_memory_to_use = static_cast<long>(std::min<uint64_t>(limits.max_image_bytes - ours, LONG_MAX));
  if (ci.jpeg_color_space == JCS_GRAYSCALE)
    ci.out_color_space = JCS_GRAYSCALE;
  else if (ci.jpeg_color_space == JCS_CMYK || ci.jpeg_color_space == JCS_YCCK)
    ci.out_color_space = JCS_CMYK;
  else
    ci.out_color_space = JCS_EXT_BGR;
  jpeg_start_decompress(&ci);
  const int ch = ci.out_color_space == JCS_GRAYSCALE ? 1 : ci.out_color_space == JCS_CMYK ? 4 : 3;
  if (static_cast<int>(ci.output_components) != ch || ci.output_width == 0 || ci.output_height == 0) {
    jpeg_abort_decompress(&ci);
    return false;
  }
  m.create(static_cast<int>(ci.output_height), static_cast<int>(ci.output_width), CV_8UC(ch));
  while (ci.output_scanline < ci.output_height) {
    JSAMPROW row = m.ptr<uint8_t>(static_cast<int>(ci.output_scanline));
    jpeg_read_scanlines(&ci, &row, 1);
  }
  jpeg_finish_decompress(&ci);
  return true;
}

// Any sampling layout libjpeg reads is read (it scales every layout). A fresh
// decompressor per file: a failed decode leaves nothing behind for the next file.
Decoded decode_jpeg(Bytes b, const DecodeLimits& limits) {
  Decoded out;
  JpegDecompressor dec;
  cv::Mat m;
  unsigned num = 8;
  if (!jpeg_decode_scaled(dec, b, limits, m, num)) {
    const int code = dec.err.mgr.msg_code;
    out.defect = dec.err.over_budget || (!dec.err.warning && (code == JERR_NO_BACKING_STORE || code == JERR_OUT_OF_MEMORY))
                     ? Defect::over_memory_budget
                 : dec.err.warning                                ? Defect::decode_warning
                 : unsupported_variant(code)                   ? Defect::unsupported_variant
                                                                : Defect::decode_failed;
    return out;
  }
  const int sw = m.cols, sh = m.rows, ch = m.channels();
  const uint32_t w = dec.cinfo.image_width, h = dec.cinfo.image_height;
  if (ch == 4) {  // Adobe CMYK JPEGs store inverted ink values; turn into BGR
    cv::Mat bgr(sh, sw, CV_8UC3);
    for (int y = 0; y < sh; ++y) {
      const uint8_t* s = m.ptr<uint8_t>(y);
      uint8_t* d = bgr.ptr<uint8_t>(y);
      for (int x = 0; x < sw; ++x, s += 4, d += 3) {
        int k = s[3];
        d[0] = static_cast<uint8_t>(s[2] * k / 255);
        d[1] = static_cast<uint8_t>(s[1] * k / 255);
        d[2] = static_cast<uint8_t>(s[0] * k / 255);
      }
    }
    m = bgr;
  }
  // Output sizes round up: a last column/row standing for a partial 8x8 block would
  // weigh as much as a whole one and shift the picture by up to a pixel (a flipped
  // copy shifts the other way). Keep only the pixels that stand for whole samples.
  const int exact_w = static_cast<int>(uint64_t{w} * num / 8), exact_h = static_cast<int>(uint64_t{h} * num / 8);
  if (exact_w > 0 && exact_h > 0 && (exact_w < sw || exact_h < sh)) m = m(cv::Rect(0, 0, exact_w, exact_h));
  out.reduced = reduce(m, limits);
  return out;
}

uint8_t count_distinct(const cv::Mat& m, int cap) {
  DistinctCounter count(cap);
  for (int y = 0; y < m.rows && !count.full(); ++y) count.add(m.ptr<uint8_t>(y), size_t(m.cols), m.channels());
  return static_cast<uint8_t>(count.count());
}

// Reads LSB-first variable-width codes from a GIF sub-block chain.
class GifCodeReader {
 public:
  GifCodeReader(Bytes b, size_t off) : b_(b), off_(off) {}
  // Returns -1 at the end of the data.
  int next(int width) {
    while (nbits_ < width) {
      if (block_left_ == 0) {
        if (!has(b_, off_, 1) || b_[off_] == 0) return -1;
        block_left_ = b_[off_++];
      }
      if (!has(b_, off_, 1)) return -1;
      acc_ |= uint32_t{b_[off_++]} << nbits_;
      nbits_ += 8;
      --block_left_;
    }
    int code = static_cast<int>(acc_ & ((1u << width) - 1));
    acc_ >>= width;
    nbits_ -= width;
    return code;
  }

 private:
  Bytes b_;
  size_t off_;
  uint32_t acc_ = 0;
  int nbits_ = 0;
  int block_left_ = 0;
};

}  // namespace

cv::Mat decode_gif_first_frame(std::span<const uint8_t> b, Defect& defect, const DecodeLimits& limits) {
  defect = Defect::none;
  auto fail = [&](Defect d) {
    defect = d;
    return cv::Mat();
  };
  if (!has(b, 0, 13)) return fail(Defect::truncated);
  int sw = *le16(b, 6), sh = *le16(b, 8);
  uint8_t packed = b[10];
  size_t off = 13;
  Bytes palette;
  if (packed & 0x80) {
    size_t n = 3u * (1u << ((packed & 7) + 1));
    if (!has(b, off, n)) return fail(Defect::truncated);
    palette = b.subspan(off, n);
    off += n;
  }
  // Skip extensions up to the first image descriptor, keeping the transparent
  // colour index of the last graphic control extension before it (GIF89a section 23).
  int transparent = -1;
  while (true) {
    if (!has(b, off, 1)) return fail(Defect::truncated);
    if (b[off] == 0x2C) break;
    if (b[off] != 0x21) return fail(Defect::bad_header);
    if (has(b, off, 8) && b[off + 1] == 0xF9 && b[off + 2] == 4) transparent = (b[off + 3] & 1) ? b[off + 6] : -1;
    off += 2;
    while (true) {
      if (!has(b, off, 1)) return fail(Defect::truncated);
      uint8_t n = b[off++];
      if (n == 0) break;
      off += n;
    }
  }
  if (!has(b, off, 11)) return fail(Defect::truncated);
  int left = *le16(b, off + 1), top = *le16(b, off + 3), fw = *le16(b, off + 5), fh = *le16(b, off + 7);
  uint8_t ip = b[off + 9];
  off += 10;
  if (ip & 0x80) {
    size_t n = 3u * (1u << ((ip & 7) + 1));
    if (!has(b, off, n)) return fail(Defect::truncated);
    palette = b.subspan(off, n);
    off += n;
  }
  bool interlaced = (ip & 0x40) != 0;
  if (!has(b, off, 1)) return fail(Defect::truncated);
  int min_code = b[off++];
  if (min_code < 1 || min_code > 11 || fw <= 0 || fh <= 0) return fail(Defect::bad_header);
  // The frame's own size is not the screen's (which the caller's budget was
  // computed from): its indices are held whole, so they count against the
  // limits too (a 65535x65535 frame on a tiny screen asked for 4 GB; fuzzing).
  const uint64_t frame_pixels = uint64_t(fw) * uint64_t(fh);
  if (frame_pixels > limits.max_pixels) return fail(Defect::too_many_pixels);
  const int ch = transparent >= 0 ? 4 : 3;  // BGR, or BGRA with the transparent index (and the screen the frame leaves) clear
  if (frame_pixels + uint64_t(sw) * uint64_t(sh) * ch > limits.max_image_bytes) return fail(Defect::over_memory_budget);

  // LZW (GIF89a appendix F): dictionary of prefix/suffix pairs, 12-bit codes at most.
  std::vector<uint8_t> indices(static_cast<size_t>(fw) * fh, 0);
  size_t produced = 0;
  const int clear = 1 << min_code, eoi = clear + 1;
  std::vector<uint16_t> prefix(4096);
  std::vector<uint8_t> suffix(4096), stack(4097);
  int width = min_code + 1, next_code = clear + 2, prev = -1;
  uint8_t first_byte = 0;
  for (int i = 0; i < clear; ++i) suffix[i] = static_cast<uint8_t>(i);
  GifCodeReader reader(b, off);
  bool ended = false;
  while (produced < indices.size()) {
    int code = reader.next(width);
    if (code < 0) break;
    if (code == clear) {
      width = min_code + 1;
      next_code = clear + 2;
      prev = -1;
      continue;
    }
    if (code == eoi) {
      ended = true;
      break;
    }
    int sp = 0, cur = code;
    if (prev < 0) {
      if (code >= clear) return fail(Defect::decode_warning);
      first_byte = static_cast<uint8_t>(code);
      indices[produced++] = first_byte;
      prev = code;
      continue;
    }
    if (code > next_code || (code == next_code && next_code >= 4096)) return fail(Defect::decode_warning);
    if (code == next_code) {  // the KwKwK case
      stack[sp++] = first_byte;
      cur = prev;
    }
    while (cur >= clear) {
      if (sp >= 4096) return fail(Defect::decode_warning);
      stack[sp++] = suffix[cur];
      cur = prefix[cur];
    }
    stack[sp++] = static_cast<uint8_t>(cur);
    first_byte = static_cast<uint8_t>(cur);
    while (sp > 0 && produced < indices.size()) indices[produced++] = stack[--sp];
    if (next_code < 4096) {
      prefix[next_code] = static_cast<uint16_t>(prev);
      suffix[next_code] = first_byte;
      ++next_code;
      if (next_code == (1 << width) && width < 12) ++width;
    }
    prev = code;
  }
  if (produced < indices.size() && !ended) return fail(Defect::decode_warning);

  cv::Mat img(sh, sw, CV_8UC(ch), cv::Scalar(0, 0, 0, 0));
  auto colour = [&](uint8_t i, uint8_t* d) {
    if (ch == 4) d[3] = i == transparent ? 0 : 255;
    if (size_t{i} * 3 + 2 < palette.size()) {
      d[0] = palette[i * 3 + 2];
      d[1] = palette[i * 3 + 1];
      d[2] = palette[i * 3];
    } else {
      d[0] = d[1] = d[2] = i;
    }
  };
  // Interlaced GIFs store rows in four passes: every 8th from 0, 8th from 4, 4th from 2, 2nd from 1.
  std::vector<int> row_order;
  row_order.reserve(fh);
  if (interlaced) {
    const int starts[4] = {0, 4, 2, 1}, steps[4] = {8, 8, 4, 2};
    for (int p = 0; p < 4; ++p)
      for (int y = starts[p]; y < fh; y += steps[p]) row_order.push_back(y);
  } else {
    for (int y = 0; y < fh; ++y) row_order.push_back(y);
  }
  for (int r = 0; r < fh; ++r) {
    int y = top + row_order[r];
    if (y < 0 || y >= sh) continue;
    uint8_t* d = img.ptr<uint8_t>(y);
    for (int x = 0; x < fw; ++x) {
      int cx = left + x;
      if (cx >= sw) break;
      colour(indices[static_cast<size_t>(r) * fw + x], d + cx * ch);
    }
  }
  return img;
}

namespace {

// Bytes of one sample as the decoder gives it, and channels of its output.
uint64_t sample_bytes(const ProbeInfo& p) { return p.bit_depth > 16 ? 4 : p.bit_depth > 8 ? 2 : 1; }
uint64_t output_channels(const ProbeInfo& p) {
  switch (p.mode) {
    case ColorMode::gray: return 1;
    case ColorMode::rgb: return p.format == Format::png ? 4 : 3;  // OpenCV gives a PNG's tRNS as alpha
    default: return 4;  // grey+alpha, RGBA, palettes (alpha possible), CMYK, unknown
  }
}

// The lock that lets one large decode run at a time (decode_internal.h).
std::unique_lock<std::mutex> large_decode_turn(uint64_t bytes) {
  static std::mutex large;
  if (bytes <= kSharedDecodeBytes) return {};
  return std::unique_lock<std::mutex>(large);
}

// The memory of the full decode: the decoder's buffer, one 8-bit copy (the
// conversion, or the direct PNG path's inflated rows) and the block reduction.
uint64_t full_decode_bytes(const ProbeInfo& p, const DecodeLimits& limits) {
  const uint64_t px = uint64_t{p.width} * p.height;
  const uint64_t ch = p.format == Format::gif ? 4 : output_channels(p);  // GIF: BGRA when it has a transparent index
  uint64_t bytes = px * ch * sample_bytes(p) + px * ch;
  if (px > limits.block_above_pixels) {
    const uint32_t k = box_factor(p.width, p.height, limits.reduced_side);
    if (k > 1) bytes += BoxReducer::bytes(p.width, p.height, int(ch), k);
  }
  return bytes;
}

bool streams(const ProbeInfo& p, const DecodeLimits& limits) {
  return p.format == Format::png && uint64_t{p.width} * p.height > limits.block_above_pixels && limits.stream_large_png &&
         png_streamed_bytes(p, limits.reduced_side) > 0;
}

}  // namespace

uint64_t decode_memory_estimate(const ProbeInfo& p, const DecodeLimits& limits) {
  const uint64_t px = uint64_t{p.width} * p.height;
  if (p.format == Format::jpeg) {  // the scaled output; a progressive JPEG keeps every coefficient (2 bytes; 4:4:4 at most)
    const uint64_t comps = p.mode == ColorMode::gray ? 1 : p.mode == ColorMode::cmyk ? 4 : 3;
    const uint64_t num = jpeg_scale_num(p.width, p.height, limits.reduced_side);
    const uint64_t out = jpeg_output_bytes(p.width, p.height, num, comps == 4 ? 7 : comps);  // CMYK: and its BGR copy
    return out + (p.interlaced ? px * comps * 2 : 0);
  }
  if (streams(p, limits)) return png_streamed_bytes(p, limits.reduced_side);
  return full_decode_bytes(p, limits);
}

Decoded decode_image(std::span<const uint8_t> b, const ProbeInfo& probe, const DecodeLimits& limits) {
  // OpenCV's decoders would print to stderr for every damaged file; tamis reports them itself.
  static const bool silenced = [] {
    cv::utils::logging::setLogLevel(cv::utils::logging::LOG_LEVEL_SILENT);
    return true;
  }();
  (void)silenced;
  Decoded out;
  const uint64_t pixels = uint64_t{probe.width} * probe.height;
  if (pixels > limits.max_pixels) {
    out.defect = Defect::too_many_pixels;
    return out;
  }
  if (probe.format == Format::jpeg) {
    auto turn = large_decode_turn(decode_memory_estimate(probe, limits));
    return decode_jpeg(b, limits);
  }
  if (probe.format == Format::webp && probe.frames > 1) {
    out.defect = Defect::no_decoder;  // OpenCV 4.6 reads no animated WebP
    return out;
  }
  if (streams(probe, limits)) {
    const uint64_t need = png_streamed_bytes(probe, limits.reduced_side);
    if (need <= limits.max_image_bytes) {
      auto turn = large_decode_turn(need);
      if (decode_png_streamed(b, probe, limits.reduced_side, out)) return out;
      out = Decoded{};  // declined: libpng decides, within the budget
    }
  }
  const uint64_t need = full_decode_bytes(probe, limits);
  if (need > limits.max_image_bytes) {
    out.defect = Defect::over_memory_budget;
    return out;
  }
  auto turn = large_decode_turn(need);
  cv::Mat m;
  if (probe.format == Format::gif) {
    m = decode_gif_first_frame(b, out.defect, limits);
    if (out.defect != Defect::none) return out;
  } else if (!decode_png_direct(b, probe, m)) {
    m = opencv_imdecode(b, cv::IMREAD_UNCHANGED | cv::IMREAD_IGNORE_ORIENTATION);
  }
  if (m.empty()) {
    // A TIFF whose header and strips the probe found whole, with samples of more
    // than 16 bits (32- or 64-bit integers or floats), is a variant OpenCV does not
    // read in every layout (a planar float64 RGB, scikit-image's multipage_rgb.tif),
    // not a damaged file.
    out.defect = probe.format == Format::tiff && probe.bit_depth > 16 ? Defect::unsupported_variant : Defect::decode_failed;
    return out;
  }
  if (static_cast<uint32_t>(m.cols) != probe.width || static_cast<uint32_t>(m.rows) != probe.height) {
    out.defect = Defect::bad_header;  // the decoder disagrees with the header
    return out;
  }
  uint32_t top = m.depth() == CV_16U ? 65535 : 255;
  if (probe.format == Format::pnm) {
    const PnmHeader ph = read_pnm_header(b);
    // A bitmap (P1, P4) comes as 0 and 255 already.
    if (ph.kind != '1' && ph.kind != '4' && ph.status == PnmHeader::Status::ok && ph.maxval >= 1 && ph.maxval <= 65535)
      top = static_cast<uint32_t>(ph.maxval);
    // OpenCV (4.6) gives a PAM's RGB and RGB_ALPHA tuples in the file's order,
    // red first, where every other path gives blue first: swapped here, so that a
    // PAM and a PNG of one picture have the same colours (a PPM is already BGR).
    if (ph.kind == '7' && (m.channels() == 3 || m.channels() == 4))
      cv::cvtColor(m, m, m.channels() == 3 ? cv::COLOR_RGB2BGR : cv::COLOR_RGBA2BGRA);
  }
  m = to_8bit(m, top);
  out.distinct = count_distinct(m, 65);
  if (m.channels() == 2 || m.channels() == 4) {  // judged as it looks over a plain ground
    const int ch = m.channels();
    // libtiff's RGBA reader, which OpenCV uses for 8-bit TIFFs, gives colour
    // already premultiplied (associated alpha), whatever the file stores.
    const bool premultiplied = probe.format == Format::tiff && probe.bit_depth <= 8;
    for (int y = 0; y < m.rows; ++y)  // the least alpha at full resolution, in the same pass
      out.alpha_min = std::min(out.alpha_min, premultiply_row(m.ptr<uint8_t>(y), size_t(m.cols), ch, !premultiplied));
    out.reduced = flatten_alpha(reduce(m, limits));
    return out;
  }
  out.reduced = reduce(m, limits);
  return out;
}

}  // namespace tamis
