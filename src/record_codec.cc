#include "record_codec.h"

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
                        st.luma_mean, st.luma_std, st.entropy, st.focus, st.alpha_min, st.channels_equal, st.distinct});
  if (with_lookalike) {
    e.push_back(r.features.look.phash);
    e.push_back(json::binary(std::vector<uint8_t>(r.features.look.thumb.begin(), r.features.look.thumb.end())));
  }
  return e;
}

FileRecord record_from_json(const json& e) {
  if (!e.is_array() || (e.size() != 27 && e.size() != 29)) throw std::runtime_error("malformed record");
  FileRecord r;
  const auto& path = e[0].get_binary();
  r.path.assign(path.begin(), path.end());
  r.size = e[1].get<uint64_t>();
  r.mtime_ns = e[2].get<int64_t>();
  r.inode = e[3].get<uint64_t>();
  r.kind = enum_at<FileKind>(e[4], int(FileKind::ignored));
  r.defect = enum_at<Defect>(e[5], int(Defect::no_decoder));
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
  if (e.size() == 29) {
    r.features.look.phash = e[27].get<std::array<uint64_t, kDihedralCount>>();
    const auto& t = e[28].get_binary();
    if (t.size() != r.features.look.thumb.size()) throw std::runtime_error("record: thumbnail size");
    std::copy(t.begin(), t.end(), r.features.look.thumb.begin());
  }
  return r;
}

}  // namespace tamis::detail
