#include "tamis/decode.h"

#include <turbojpeg.h>

#include <algorithm>
#include <memory>
#include <vector>

#include <opencv2/core/utils/logger.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "byte_reader.h"
#include "tamis/codecs.h"

namespace tamis {

using namespace detail;

namespace {

struct TjHandle {
  tjhandle h = tjInitDecompress();
  ~TjHandle() {
    if (h) tjDestroy(h);
  }
};

// One decompressor per thread, made on first use.
tjhandle thread_decompressor() {
  thread_local TjHandle handle;
  return handle.h;
}

cv::Mat to_8bit(const cv::Mat& m) {
  if (m.depth() == CV_8U) return m;
  cv::Mat out;
  double scale = m.depth() == CV_16U ? 1.0 / 257.0 : m.depth() == CV_16S ? 1.0 / 128.0 : 255.0;
  m.convertTo(out, CV_8U, scale);
  return out;
}

cv::Mat reduce(const cv::Mat& m, uint32_t side) {
  int shorter = std::min(m.cols, m.rows);
  if (shorter <= static_cast<int>(side) * 2) return m;
  double f = static_cast<double>(side) / shorter;
  cv::Mat out;
  cv::resize(m, out, cv::Size(std::max(1, int(m.cols * f + 0.5)), std::max(1, int(m.rows * f + 0.5))), 0, 0,
             cv::INTER_AREA);
  return out;
}

Decoded decode_jpeg(Bytes b, const DecodeLimits& limits) {
  Decoded out;
  tjhandle tj = thread_decompressor();
  int w = 0, h = 0, subsamp = 0, colorspace = 0;
  if (!tj || tjDecompressHeader3(tj, b.data(), b.size(), &w, &h, &subsamp, &colorspace) != 0) {
    out.defect = Defect::decode_failed;
    return out;
  }
  int nsf = 0;
  tjscalingfactor* sf = tjGetScalingFactors(&nsf);
  // Smallest scale whose shorter side still reaches the wanted side.
  tjscalingfactor best{1, 1};
  int best_short = std::min(w, h);
  for (int i = 0; i < nsf; ++i) {
    int sw = TJSCALED(w, sf[i]), sh = TJSCALED(h, sf[i]);
    int s = std::min(sw, sh);
    if (s >= static_cast<int>(limits.reduced_side) && s < best_short) {
      best = sf[i];
      best_short = s;
    }
  }
  int sw = TJSCALED(w, best), sh = TJSCALED(h, best);
  int pf = TJPF_BGR, ch = 3;
  if (colorspace == TJCS_GRAY) {
    pf = TJPF_GRAY;
    ch = 1;
  } else if (colorspace == TJCS_CMYK || colorspace == TJCS_YCCK) {
    pf = TJPF_CMYK;
    ch = 4;
  }
  cv::Mat m(sh, sw, CV_8UC(ch));
  int rc = tjDecompress2(tj, b.data(), b.size(), m.data, sw, static_cast<int>(m.step), sh, pf, 0);
  if (rc != 0) {
    out.defect = tjGetErrorCode(tj) == TJERR_WARNING ? Defect::decode_warning : Defect::decode_failed;
    return out;
  }
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
  // TJSCALED rounds up: a last column/row standing for a partial 8x8 block would
  // weigh as much as a whole one and shift the picture by up to a pixel (a flipped
  // copy shifts the other way). Keep only the pixels that stand for whole samples.
  int exact_w = w * best.num / best.denom, exact_h = h * best.num / best.denom;
  if (exact_w > 0 && exact_h > 0 && (exact_w < sw || exact_h < sh)) m = m(cv::Rect(0, 0, exact_w, exact_h));
  out.reduced = reduce(m, limits.reduced_side);
  return out;
}

// Distinct pixel values (all channels together), counted up to `cap`. Masks and
// label maps have a handful; photographs have thousands.
uint8_t count_distinct(const cv::Mat& m, int cap) {
  const int ch = m.channels();
  int count = 0;
  if (ch == 1) {  // a bit per grey level
    uint64_t seen[4] = {0, 0, 0, 0};
    for (int y = 0; y < m.rows; ++y) {
      const uint8_t* p = m.ptr<uint8_t>(y);
      for (int x = 0; x < m.cols; ++x) {
        const uint64_t bit = uint64_t{1} << (p[x] & 63);
        uint64_t& word = seen[p[x] >> 6];
        if (word & bit) continue;
        word |= bit;
        if (++count >= cap) return static_cast<uint8_t>(cap);
      }
    }
    return static_cast<uint8_t>(count);
  }
  // Colours: an open-addressing set of 512 slots (cap is at most 255, so a free
  // slot always remains). Opaque white in BGRA packs to the empty marker, so that
  // one colour is tracked apart.
  constexpr uint32_t kEmpty = UINT32_MAX;
  uint32_t slots[512];
  std::fill(std::begin(slots), std::end(slots), kEmpty);
  bool seen_empty_value = false;
  uint32_t last = kEmpty;
  bool have_last = false;
  for (int y = 0; y < m.rows; ++y) {
    const uint8_t* p = m.ptr<uint8_t>(y);
    for (int x = 0; x < m.cols; ++x, p += ch) {
      uint32_t v = 0;
      for (int c = 0; c < ch; ++c) v = (v << 8) | p[c];
      if (have_last && v == last) continue;
      last = v;
      have_last = true;
      if (v == kEmpty) {
        if (seen_empty_value) continue;
        seen_empty_value = true;
      } else {
        uint32_t h = (v * 0x9e3779b1u) >> 23;  // 9 bits
        while (slots[h] != kEmpty && slots[h] != v) h = (h + 1) & 511;
        if (slots[h] == v) continue;
        slots[h] = v;
      }
      if (++count >= cap) return static_cast<uint8_t>(cap);
    }
  }
  return static_cast<uint8_t>(count);
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

cv::Mat decode_gif_first_frame(std::span<const uint8_t> b, Defect& defect) {
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
  // Skip extensions up to the first image descriptor.
  while (true) {
    if (!has(b, off, 1)) return fail(Defect::truncated);
    if (b[off] == 0x2C) break;
    if (b[off] != 0x21) return fail(Defect::bad_header);
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

  cv::Mat img(sh, sw, CV_8UC3, cv::Scalar(0, 0, 0));
  auto colour = [&](uint8_t i, uint8_t* d) {
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
      colour(indices[static_cast<size_t>(r) * fw + x], d + cx * 3);
    }
  }
  return img;
}

Decoded decode_image(std::span<const uint8_t> b, const ProbeInfo& probe, const DecodeLimits& limits) {
  // OpenCV's decoders would print to stderr for every damaged file; tamis reports them itself.
  static const bool silenced = [] {
    cv::utils::logging::setLogLevel(cv::utils::logging::LOG_LEVEL_SILENT);
    return true;
  }();
  (void)silenced;
  Decoded out;
  if (uint64_t{probe.width} * probe.height > limits.max_pixels) {
    out.defect = Defect::too_many_pixels;
    return out;
  }
  if (probe.format == Format::jpeg) return decode_jpeg(b, limits);
  if (probe.format == Format::webp && probe.frames > 1) {
    out.defect = Defect::no_decoder;  // OpenCV 4.6 reads no animated WebP
    return out;
  }
  cv::Mat m;
  if (probe.format == Format::gif) {
    m = decode_gif_first_frame(b, out.defect);
    if (out.defect != Defect::none) return out;
  } else if (!decode_png_direct(b, probe, m)) {
    m = opencv_imdecode(b, cv::IMREAD_UNCHANGED | cv::IMREAD_IGNORE_ORIENTATION);
  }
  if (m.empty()) {
    out.defect = Defect::decode_failed;
    return out;
  }
  if (static_cast<uint32_t>(m.cols) != probe.width || static_cast<uint32_t>(m.rows) != probe.height) {
    out.defect = Defect::bad_header;  // the decoder disagrees with the header
    return out;
  }
  m = to_8bit(m);
  out.distinct = count_distinct(m, 65);
  if (m.channels() == 2 || m.channels() == 4) {  // alpha at full resolution
    cv::Mat a;
    cv::extractChannel(m, a, m.channels() - 1);
    double lo = 255;
    cv::minMaxLoc(a, &lo);
    out.alpha_min = static_cast<uint8_t>(lo);
  }
  if (m.channels() == 2) {  // gray + alpha: keep the gray plane
    cv::Mat g;
    cv::extractChannel(m, g, 0);
    m = g;
  }
  out.reduced = reduce(m, limits.reduced_side);
  return out;
}

}  // namespace tamis
