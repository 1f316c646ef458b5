#include "tamis/model/record_codec.h"

#include <algorithm>
#include <bit>
#include <stdexcept>

namespace tamis::detail {

using nlohmann::json;

namespace {
template <typename E>
E enum_at(const json& j, int last) {
  int v = j.get<int>();
  if (v < 0 || v > last) throw std::runtime_error("record: value out of range");
  return static_cast<E>(v);
}
}  // namespace

json record_to_json(const FileRecord& r, bool with_lookalike) {
  const auto& p = r.probe;
  const auto& st = r.features.stats;
  json e = json::array({json::binary(std::vector<uint8_t>(r.path.begin(), r.path.end())), r.size, r.mtime_ns, r.inode,
                        int(r.kind), int(r.defect), int(p.format), int(p.mode), p.bit_depth, p.interlaced, p.has_exif,
                        p.has_gps, p.orientation, p.width, p.height, p.frames, r.features.content_hash[0],
                        r.features.content_hash[1], r.features.has_content_hash, r.features.has_lookalike,
                        st.luma_mean, st.luma_std, st.entropy, st.focus, st.alpha_min, st.channels_equal, st.distinct,
                        p.jpeg_quality});
  if (with_lookalike) e.push_back(r.features.look.phash);
  return e;
}

FileRecord record_from_json(const json& e) {
  if (!e.is_array() || (e.size() != 28 && e.size() != 29)) throw std::runtime_error("malformed record");
  FileRecord r;
  const auto& path = e[0].get_binary();
  r.path.assign(path.begin(), path.end());
  r.size = e[1].get<uint64_t>();
  r.mtime_ns = e[2].get<int64_t>();
  r.inode = e[3].get<uint64_t>();
  r.kind = enum_at<FileKind>(e[4], int(FileKind::ignored));
  r.defect = enum_at<Defect>(e[5], int(kLastDefect));
  r.probe.format = enum_at<Format>(e[6], int(Format::pnm));
  r.probe.mode = enum_at<ColorMode>(e[7], int(ColorMode::cmyk));
  r.probe.bit_depth = e[8].get<uint8_t>();
  r.probe.interlaced = e[9].get<bool>();
  r.probe.has_exif = e[10].get<bool>();
  r.probe.has_gps = e[11].get<bool>();
  r.probe.orientation = e[12].get<uint16_t>();
  r.probe.width = e[13].get<uint32_t>();
  r.probe.height = e[14].get<uint32_t>();
  r.probe.frames = e[15].get<uint32_t>();
  r.features.content_hash = {e[16].get<uint64_t>(), e[17].get<uint64_t>()};
  r.features.has_content_hash = e[18].get<bool>();
  r.features.has_lookalike = e[19].get<bool>();
  auto& st = r.features.stats;
  st.luma_mean = e[20].get<float>();
  st.luma_std = e[21].get<float>();
  st.entropy = e[22].get<float>();
  st.focus = e[23].get<float>();
  st.alpha_min = e[24].get<uint8_t>();
  st.channels_equal = e[25].get<bool>();
  st.distinct = e[26].get<uint8_t>();
  r.probe.jpeg_quality = e[27].get<uint8_t>();
  if (r.probe.jpeg_quality > 100) throw std::runtime_error("record: value out of range");
  if (e.size() == 29) r.features.look.phash = e[28].get<std::array<uint64_t, kDihedralCount>>();
  return r;
}

}  // namespace tamis::detail

namespace tamis::detail {

namespace {

void put_le(std::vector<uint8_t>& out, uint64_t v, int bytes) {
  for (int k = 0; k < bytes; ++k) out.push_back(static_cast<uint8_t>(v >> (8 * k)));
}
uint64_t get_le(const uint8_t* p, int bytes) {
  uint64_t v = 0;
  for (int k = 0; k < bytes; ++k) v |= uint64_t(p[k]) << (8 * k);
  return v;
}
void put_f32(std::vector<uint8_t>& out, float f) { put_le(out, std::bit_cast<uint32_t>(f), 4); }
float get_f32(const uint8_t* p) { return std::bit_cast<float>(static_cast<uint32_t>(get_le(p, 4))); }

}  // namespace

void record_to_bytes(const FileRecord& r, std::vector<uint8_t>& out) {
  const auto& p = r.probe;
  const auto& f = r.features;
  const size_t start = out.size();
  out.reserve(start + (f.has_lookalike ? kRecordBytesLookalike : kRecordBytesHead));
  for (uint8_t b : {uint8_t(r.kind), uint8_t(r.defect), uint8_t(p.format), uint8_t(p.mode), p.bit_depth}) out.push_back(b);
  out.push_back(static_cast<uint8_t>(p.interlaced | p.has_exif << 1 | p.has_gps << 2 | f.has_content_hash << 3 |
                                     f.has_lookalike << 4 | f.stats.channels_equal << 5));
  out.push_back(static_cast<uint8_t>(p.orientation));
  out.push_back(p.jpeg_quality);
  put_le(out, p.width, 4);
  put_le(out, p.height, 4);
  put_le(out, p.frames, 4);
  put_le(out, f.content_hash[0], 8);
  put_le(out, f.content_hash[1], 8);
  for (float v : {f.stats.luma_mean, f.stats.luma_std, f.stats.entropy, f.stats.focus}) put_f32(out, v);
  out.push_back(f.stats.alpha_min);
  out.push_back(f.stats.distinct);
  if (f.has_lookalike)
    for (uint64_t h : f.look.phash) put_le(out, h, 8);
}

bool record_from_bytes(std::span<const uint8_t> bytes, FileRecord& r) {
  if (bytes.size() < kRecordBytesHead) return false;
  const uint8_t* b = bytes.data();
  const uint8_t flags = b[5];
  const bool look = flags & 16;
  if (flags >> 6 || bytes.size() != (look ? kRecordBytesLookalike : kRecordBytesHead)) return false;
  if (b[0] > uint8_t(FileKind::ignored) || b[1] > uint8_t(kLastDefect) || b[2] > uint8_t(Format::pnm) ||
      b[3] > uint8_t(ColorMode::cmyk))
    return false;
  r.kind = static_cast<FileKind>(b[0]);
  r.defect = static_cast<Defect>(b[1]);
  auto& p = r.probe;
  p.format = static_cast<Format>(b[2]);
  p.mode = static_cast<ColorMode>(b[3]);
  p.bit_depth = b[4];
  p.interlaced = flags & 1;
  p.has_exif = flags & 2;
  p.has_gps = flags & 4;
  if (b[6] > 8 || b[7] > 100) return false;
  p.orientation = b[6];
  p.jpeg_quality = b[7];
  p.width = static_cast<uint32_t>(get_le(b + 8, 4));
  p.height = static_cast<uint32_t>(get_le(b + 12, 4));
  p.frames = static_cast<uint32_t>(get_le(b + 16, 4));
  auto& f = r.features;
  f.content_hash = {get_le(b + 20, 8), get_le(b + 28, 8)};
  f.has_content_hash = flags & 8;
  f.has_lookalike = look;
  f.stats.luma_mean = get_f32(b + 36);
  f.stats.luma_std = get_f32(b + 40);
  f.stats.entropy = get_f32(b + 44);
  f.stats.focus = get_f32(b + 48);
  f.stats.alpha_min = b[52];
  f.stats.channels_equal = flags & 32;
  f.stats.distinct = b[53];
  f.look = {};
  if (look)
    for (int t = 0; t < kDihedralCount; ++t) f.look.phash[t] = get_le(b + kRecordBytesHead + 8 * t, 8);
  return true;
}

}  // namespace tamis::detail
