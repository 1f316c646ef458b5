#include "tamis/report/index_file.h"

#include <algorithm>
#include <fstream>
#include <functional>
#include <iterator>
#include <map>
#include <memory>
#include <set>
#include <stdexcept>

#include <nlohmann/json.hpp>
#include <xxhash.h>

#include "tamis/base/atomic_file.h"
#include "tamis/base/errors.h"
#include "tamis/model/cbor_reader.h"
#include "tamis/model/record_codec.h"

namespace tamis {

using nlohmann::json;
using detail::record_from_json;
using detail::record_to_json;

namespace {

json bin(const std::string& s) { return json::binary(std::vector<uint8_t>(s.begin(), s.end())); }

std::string str(const json& j) {
  if (!j.is_binary()) throw std::runtime_error("index: expected a byte string");
  const auto& b = j.get_binary();
  return std::string(b.begin(), b.end());
}

json bins(const std::vector<std::string>& v) {
  json a = json::array();
  for (const auto& s : v) a.push_back(bin(s));
  return a;
}

std::vector<std::string> strs(const json& j) {
  std::vector<std::string> out;
  for (const auto& e : j) out.push_back(str(e));
  return out;
}

// A CBOR head (RFC 8949, 3.1): major type and length, the length in its shortest form.
// The index's checksum: the first entry of the top-level map, under the key
// "_checksum" (it sorts before every other key), an unsigned 64-bit integer in
// CBOR's 8-byte form, so that its value sits at a fixed place: bytes 12..19.
// It is XXH3-64 of every byte after it, seeded with the map's head byte.
constexpr size_t kSumAt = 12, kSumEnd = 20;
const uint8_t kSumKey[] = {0x69, '_', 'c', 'h', 'e', 'c', 'k', 's', 'u', 'm', 0x1b};  // text(9), uint64 head

std::vector<uint8_t> cbor_head(uint8_t major, uint64_t n) {
  std::vector<uint8_t> out;
  const uint8_t m = static_cast<uint8_t>(major << 5);
  int bytes = 0;
  if (n < 24) {
    out.push_back(static_cast<uint8_t>(m | n));
    return out;
  }
  if (n <= 0xff) {
    out.push_back(m | 24);
    bytes = 1;
  } else if (n <= 0xffff) {
    out.push_back(m | 25);
    bytes = 2;
  } else if (n <= 0xffffffffu) {
    out.push_back(m | 26);
    bytes = 4;
  } else {
    out.push_back(m | 27);
    bytes = 8;
  }
  for (int k = bytes - 1; k >= 0; --k) out.push_back(static_cast<uint8_t>(n >> (8 * k)));
  return out;
}
}  // namespace

void save_index(const std::filesystem::path& file, const AuditIndex& x, StagedFiles* staged, const Labelling* as_read) {
  const Labelling& labels = as_read ? *as_read : x.labels;
  json j;
  j["format"] = "tamis-index";
  j["version"] = kIndexVersion;
  j["root"] = bin(x.settings.root.string());
  j["read"] = {{"max_pixels", x.settings.read.decode.max_pixels},
               {"max_image_bytes", x.settings.read.decode.max_image_bytes},
               {"reduced_side", x.settings.read.decode.reduced_side},
               {"max_bytes", x.settings.read.max_bytes}};
  j["mask_settings"] = {{"force", bins(x.settings.masks.force)}, {"forbid", bins(x.settings.masks.forbid)}};
  j["groups_settings"] = {{"radius", x.settings.groups.radius},
                          {"min_correlation", x.settings.groups.match.min_correlation},
                          {"max_local", x.settings.groups.match.max_local},
                          {"max_chroma", x.settings.groups.match.max_chroma},
                          {"max_chroma_local", x.settings.groups.match.max_chroma_local},
                          {"fit_floor", x.settings.groups.match.fit_floor},
                          {"small_side", x.settings.groups.match.small_side},
                          {"screen_radius", x.settings.groups.screen_radius}};
  const auto& cs = x.placed.checks;
  j["checks"] = {{"min_side", cs.min_side}, {"input_side", cs.input_side}, {"min_class", cs.min_class},
                 {"max_imbalance", cs.max_imbalance}, {"outlier_z", cs.outlier_z}};
  // Arrays with an entry a record are written straight into the stream below;
  // here they are empty stand-ins that keep their place among the keys.
  j["labels"] = {{"pre_split", labels.pre_split}, {"names", bins(labels.names)}, {"label_of", json::array()},
                 {"given_split", json::array()}};
  json groups = json::array();
  for (const auto& g : x.groups.groups) {
    json links = json::array();
    for (const auto& l : g.links) links.push_back(json::array({l.a, l.b, l.turn, l.correlation, l.blur_step, l.blurred_a, l.fit_source, l.resampled, l.jpeg_quality}));
    groups.push_back({{"members", g.members}, {"exact", g.exact}, {"diameter", g.diameter},
                      {"diameter_exact", g.diameter_exact}, {"links", links}});
  }
  j["groups"] = {{"groups", groups},
                 {"exact_pairs", x.groups.exact_pairs},
                 {"candidate_hits", x.groups.candidate_hits},
                 {"confirmed_pairs", x.groups.confirmed_pairs}};
  json ev = json::array();
  for (const auto& e : x.masks.evidence)
    ev.push_back({bin(e.folder), bin(e.partner), e.layout, e.pairs, e.confirmed, e.accepted, e.decided_by});
  j["masks"] = {{"mask_of", json::array()}, {"image_of", json::array()}, {"evidence", ev},
                {"layout_roots", bins(x.masks.layout_roots)}, {"misfiled", x.masks.misfiled},
                {"orphan_images", x.masks.orphan_images}};
  // The look-alike thumbnails of group members, for the report's picture strips.
  json thumbs = json::array();
  std::set<uint32_t> shown;
  for (const auto& g : x.groups.groups) shown.insert(g.members.begin(), g.members.end());
  size_t pairs = 0;
  for (size_t i = 0; i < x.records.size() && pairs < kMaskPairsShown; ++i)
    if (x.masks.mask_of[i] >= 0) {
      shown.insert(static_cast<uint32_t>(i));
      shown.insert(static_cast<uint32_t>(x.masks.mask_of[i]));
      ++pairs;
    }
  j["thumbs"] = std::move(thumbs);  // a stand-in: written one thumbnail at a time below
  j["totals"] = {x.totals.files_seen, x.totals.images, x.totals.masks, x.totals.unreadable, x.totals.ignored};
  j["walk"] = {{"links", bins(x.walk.links)}, {"special", bins(x.walk.special)},
               {"unreadable_dirs", bins(x.walk.unreadable_dirs)}, {"dirs", bins(x.walk.dirs)}};
  // The records, the per-record arrays and the thumbnails are coded one at a
  // time into the stream rather than built into one tree first (that tree took
  // about 560 bytes a record). The bytes are what json::to_cbor gives for the whole object: maps
  // with their keys in sorted order, each length and integer in its shortest form.
  auto write = [&](std::ostream& os) {
    std::unique_ptr<XXH3_state_t, decltype(&XXH3_freeState)> sum(XXH3_createState(), &XXH3_freeState);
    bool hashing = false;
    auto put = [&](const std::vector<uint8_t>& b) {
      os.write(reinterpret_cast<const char*>(b.data()), static_cast<std::streamsize>(b.size()));
      if (hashing) XXH3_64bits_update(sum.get(), b.data(), b.size());
    };
    auto put_ints = [&](const auto& v) {
      put(cbor_head(4, v.size()));
      for (auto e : v) {
        const int64_t n = static_cast<int64_t>(e);
        put(n >= 0 ? cbor_head(0, static_cast<uint64_t>(n)) : cbor_head(1, static_cast<uint64_t>(-1 - n)));
      }
    };
    const std::map<std::string, std::function<void()>> streamed = {
        {"/records",
         [&] {
           put(cbor_head(4, x.records.size()));
           std::vector<uint8_t> one;
           for (const auto& r : x.records) {
             one.clear();
             json::to_cbor(record_to_json(r, false), one);
             put(one);
           }
         }},
        {"/labels/label_of", [&] { put_ints(labels.label_of); }},
        {"/labels/given_split", [&] { put_ints(labels.given_split); }},  // -1 for none
        {"/masks/mask_of", [&] { put_ints(x.masks.mask_of); }},
        {"/thumbs",
         [&] {
           put(cbor_head(4, shown.size()));
           std::vector<uint8_t> one;
           Thumbnail t;
           for (uint32_t m : shown) {
             if (x.thumbs.has(m))
               x.thumbs.get(m, t);
             else
               t.fill(0);
             one.clear();
             json::to_cbor(json::array({m, json::binary(std::vector<uint8_t>(t.begin(), t.end()))}), one);
             put(one);
           }
         }},
        {"/masks/image_of", [&] { put_ints(x.masks.image_of); }},
    };
    j["records"] = json::array();  // stand-in
    std::function<void(const json&, const std::string&)> put_value;
    auto put_entries = [&](const json& v, const std::string& at) {
      for (const auto& [k, e] : v.items()) {
        std::vector<uint8_t> key;
        json::to_cbor(json(k), key);
        put(key);
        put_value(e, at + "/" + k);
      }
    };
    put_value = [&](const json& v, const std::string& at) {
      if (auto it = streamed.find(at); it != streamed.end()) {
        it->second();
      } else if (v.is_object()) {
        put(cbor_head(5, v.size()));
        put_entries(v, at);
      } else {
        std::vector<uint8_t> b;
        json::to_cbor(v, b);
        put(b);
      }
    };
    // The top level: the checksum entry first (its value filled in last), then
    // the entries, every byte of which it covers.
    const auto head = cbor_head(5, j.size() + 1);
    if (head.size() != 1) throw std::logic_error("index: the top-level map head is one byte");
    os.write(reinterpret_cast<const char*>(head.data()), 1);
    os.write(reinterpret_cast<const char*>(kSumKey), sizeof kSumKey);
    const char zeros[8] = {};
    os.write(zeros, 8);
    XXH3_64bits_reset_withSeed(sum.get(), head[0]);
    hashing = true;
    put_entries(j, "");
    hashing = false;
    const uint64_t h = XXH3_64bits_digest(sum.get());
    char be[8];
    for (int k = 0; k < 8; ++k) be[k] = static_cast<char>(h >> (56 - 8 * k));
    const auto end = os.tellp();
    os.seekp(static_cast<std::streamoff>(kSumAt));
    os.write(be, 8);
    os.seekp(end);
  };
  if (staged) {
    staged->write(file, write);
  } else {
    write_file_atomically(file, write);
  }
}

AuditIndex load_index(const std::filesystem::path& file) {
  std::ifstream is(file, std::ios::binary);
  if (!is) throw std::runtime_error("cannot read index " + file.string());
  std::vector<uint8_t> bytes((std::istreambuf_iterator<char>(is)), {});
  AuditIndex x;
  // The checksum first: any changed byte (a flipped bit, a cut) is refused before
  // a value is trusted.
  if (bytes.size() < kSumEnd || !std::equal(std::begin(kSumKey), std::end(kSumKey), bytes.begin() + 1))
    throw std::runtime_error("index " + file.string() + " is damaged or not a tamis index (no checksum)");
  uint64_t stored = 0;
  for (size_t b = kSumAt; b < kSumEnd; ++b) stored = stored << 8 | bytes[b];
  if (XXH3_64bits_withSeed(bytes.data() + kSumEnd, bytes.size() - kSumEnd, bytes[0]) != stored)
    throw std::runtime_error("index " + file.string() + " is damaged (checksum mismatch)");
  try {
    json j = parse_cbor(bytes.data(), bytes.data() + bytes.size());
    if (j.value("format", "") != "tamis-index") throw std::runtime_error("not a tamis index");
    if (j.value("version", 0) != kIndexVersion)
      throw std::runtime_error("index version " + std::to_string(j.value("version", 0)) + ", this tamis reads " +
                               std::to_string(kIndexVersion));
    x.settings.root = str(j.at("root"));
    const json& rd = j.at("read");
    x.settings.read.decode.max_pixels = rd.at("max_pixels").get<uint64_t>();
    x.settings.read.decode.reduced_side = rd.at("reduced_side").get<uint32_t>();
    if (rd.contains("max_image_bytes"))  // written since the memory budget
      x.settings.read.decode.max_image_bytes = rd.at("max_image_bytes").get<uint64_t>();
    x.settings.read.max_bytes = rd.at("max_bytes").get<uint64_t>();
    x.settings.groups.radius = j.at("groups_settings").at("radius").get<int>();
    x.settings.groups.match.min_correlation = j.at("groups_settings").at("min_correlation").get<double>();
    x.settings.groups.match.max_local = j.at("groups_settings").at("max_local").get<double>();
    x.settings.groups.match.max_chroma = j.at("groups_settings").at("max_chroma").get<double>();
    if (j.at("groups_settings").contains("max_chroma_local"))  // written since the colour check's local share
      x.settings.groups.match.max_chroma_local = j.at("groups_settings").at("max_chroma_local").get<double>();
    if (j.at("groups_settings").contains("fit_floor"))  // written since the tone-and-colour fit
      x.settings.groups.match.fit_floor = j.at("groups_settings").at("fit_floor").get<double>();
    // Written since the closer correlation for small pictures; before, there was none.
    x.settings.groups.match.small_side =
        j.at("groups_settings").contains("small_side") ? j.at("groups_settings").at("small_side").get<double>() : 0.0;
    // Written since the second candidate key; before, there was none.
    x.settings.groups.screen_radius =
        j.at("groups_settings").contains("screen_radius") ? j.at("groups_settings").at("screen_radius").get<double>() : 0.0;
    x.settings.masks.force = strs(j.at("mask_settings").at("force"));
    x.settings.masks.forbid = strs(j.at("mask_settings").at("forbid"));
    const json& ck = j.at("checks");
    x.placed.checks.min_side = ck.at("min_side").get<uint32_t>();
    x.placed.checks.input_side = ck.at("input_side").get<uint32_t>();
    x.placed.checks.min_class = ck.at("min_class").get<uint64_t>();
    x.placed.checks.max_imbalance = ck.at("max_imbalance").get<double>();
    x.placed.checks.outlier_z = ck.at("outlier_z").get<double>();
    for (const auto& e : j.at("records")) {
      FileRecord r = record_from_json(e);
      x.records.push_back(std::move(r));
    }
    const size_t n = x.records.size();
    for (size_t i = 1; i < n; ++i)
      if (!(x.records[i - 1].path < x.records[i].path)) throw std::runtime_error("records out of order");
    const json& mk = j.at("masks");
    x.masks.mask_of = mk.at("mask_of").get<std::vector<int64_t>>();
    x.masks.image_of = mk.at("image_of").get<std::vector<int64_t>>();
    if (x.masks.mask_of.size() != n || x.masks.image_of.size() != n) throw std::runtime_error("mask table size");
    for (int64_t v : x.masks.mask_of)
      if (v < -1 || v >= static_cast<int64_t>(n)) throw std::runtime_error("mask link out of range");
    for (int64_t v : x.masks.image_of)
      if (v < -1 || v >= static_cast<int64_t>(n)) throw std::runtime_error("mask link out of range");
    for (const auto& e : mk.at("evidence")) {
      MaskEvidence me;
      me.folder = str(e.at(0));
      me.partner = str(e.at(1));
      me.layout = e.at(2).get<std::string>();
      me.pairs = e.at(3).get<uint64_t>();
      me.confirmed = e.at(4).get<uint64_t>();
      me.accepted = e.at(5).get<bool>();
      me.decided_by = e.at(6).get<std::string>();
      x.masks.evidence.push_back(std::move(me));
    }
    x.masks.layout_roots = strs(mk.at("layout_roots"));
    x.masks.misfiled = mk.at("misfiled").get<std::vector<uint32_t>>();
    x.masks.orphan_images = mk.at("orphan_images").get<std::vector<uint32_t>>();
    for (uint32_t v : x.masks.misfiled)
      if (v >= n) throw std::runtime_error("mask index out of range");
    for (uint32_t v : x.masks.orphan_images)
      if (v >= n) throw std::runtime_error("mask index out of range");
    const json& lb = j.at("labels");
    x.labels.pre_split = lb.at("pre_split").get<bool>();
    x.labels.names = strs(lb.at("names"));
    x.labels.label_of = lb.at("label_of").get<std::vector<int32_t>>();
    for (int v : lb.at("given_split").get<std::vector<int>>()) {
      if (v < -1 || v > 2) throw std::runtime_error("given split out of range");
      x.labels.given_split.push_back(static_cast<SplitName>(v));
    }
    if (x.labels.label_of.size() != n || x.labels.given_split.size() != n) throw std::runtime_error("label table size");
    for (int32_t l : x.labels.label_of)
      if (l < -1 || l >= static_cast<int32_t>(x.labels.names.size())) throw std::runtime_error("label out of range");
    const json& gr = j.at("groups");
    x.groups.group_of.assign(n, -1);
    for (const auto& g : gr.at("groups")) {
      Group grp;
      grp.members = g.at("members").get<std::vector<uint32_t>>();
      grp.exact = g.at("exact").get<bool>();
      grp.diameter = g.at("diameter").get<int>();
      grp.diameter_exact = g.at("diameter_exact").get<bool>();
      if (g.contains("links"))  // indexes written before the links have none
        for (const auto& l : g.at("links")) {
          GroupLink k{l.at(0).get<uint32_t>(), l.at(1).get<uint32_t>(), l.at(2).get<int>(), l.at(3).get<float>(),
                      l.at(4).get<int>(), l.at(5).get<bool>(), l.size() > 6 ? l.at(6).get<int>() : 0,
                      l.size() > 7 && l.at(7).get<bool>(),
                      l.size() > 8 ? l.at(8).get<int>() : 0};
          if (!link_in_range(k, n)) throw std::runtime_error("group link out of range");
          grp.links.push_back(k);
        }
      for (uint32_t m : grp.members) {
        if (m >= n || x.groups.group_of[m] >= 0) throw std::runtime_error("group member out of range");
        x.groups.group_of[m] = static_cast<int64_t>(x.groups.groups.size());
      }
      x.groups.groups.push_back(std::move(grp));
    }
    x.groups.exact_pairs = gr.at("exact_pairs").get<uint64_t>();
    x.groups.candidate_hits = gr.at("candidate_hits").get<uint64_t>();
    x.groups.confirmed_pairs = gr.at("confirmed_pairs").get<uint64_t>();
    x.thumbs.assign_none(n);
    std::vector<uint32_t> with_thumb;
    for (const auto& e : j.at("thumbs")) {
      uint32_t m = e.at(0).get<uint32_t>();
      if (m >= n || e.at(1).get_binary().size() != Thumbnail{}.size()) throw std::runtime_error("thumbnail out of range");
      with_thumb.push_back(m);
    }
    x.thumbs.make_room(with_thumb);
    for (const auto& e : j.at("thumbs")) {
      const auto& b = e.at(1).get_binary();
      std::copy(b.begin(), b.end(), x.thumbs.at(e.at(0).get<uint32_t>()).begin());
    }
    auto t = j.at("totals").get<std::vector<uint64_t>>();
    if (t.size() != 5) throw std::runtime_error("totals");
    x.totals = {t[0], t[1], t[2], t[3], t[4]};
    x.walk.links = strs(j.at("walk").at("links"));
    if (j.at("walk").contains("special")) x.walk.special = strs(j.at("walk").at("special"));
    x.walk.unreadable_dirs = strs(j.at("walk").at("unreadable_dirs"));
    x.walk.dirs = strs(j.at("walk").at("dirs"));
  } catch (const json::exception& e) {
    throw std::runtime_error("index " + file.string() + " is damaged: " + json_error_text(e.what()));
  } catch (const std::runtime_error& e) {
    throw std::runtime_error("index " + file.string() + ": " + e.what());
  }
  return x;
}

}  // namespace tamis
