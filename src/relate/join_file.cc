#include "tamis/relate/join_file.h"

#include <cstring>
#include <fstream>
#include <iterator>

#include <nlohmann/json.hpp>
#include <xxhash.h>

#include "tamis/model/cbor_reader.h"
#include "tamis/version.h"

namespace tamis {

using nlohmann::json;

namespace {
constexpr char kMagic[16] = {'\x89', 't', 'a', 'm', 'i', 's', '-', 'j', 'o', 'i', 'n', '\r', '\n', '\x1a', '\n', '\0'};
constexpr size_t kBody = 24;
}  // namespace

void write_join(std::ostream& os, const JoinSlice& s) {
  json links = json::array();
  for (const GroupLink& l : s.links.links)
    links.push_back(json::array({l.a, l.b, l.turn, l.correlation, l.blur_step, l.blurred_a, l.fit_source, l.resampled, l.jpeg_quality}));
  json j = {{"format", "tamis-join"},
            {"tool", s.tool.empty() ? std::string(kToolVersion) : s.tool},
            {"slice", {s.slice.index, s.slice.count}},
            {"groups_key", json::binary(std::vector<uint8_t>(s.groups_key.begin(), s.groups_key.end()))},
            {"parts_key", s.parts_key},
            {"records", s.records},
            {"candidate_hits", s.links.candidate_hits},
            {"links", std::move(links)}};
  std::vector<uint8_t> body;
  json::to_cbor(j, body);
  const uint64_t sum = XXH3_64bits(body.data(), body.size());
  char le[8];
  for (int k = 0; k < 8; ++k) le[k] = static_cast<char>(sum >> (8 * k));
  os.write(kMagic, sizeof kMagic);
  os.write(le, 8);
  os.write(reinterpret_cast<const char*>(body.data()), static_cast<std::streamsize>(body.size()));
  if (!os) throw std::runtime_error("the join's pairs could not be written");
}

JoinSlice load_join(const std::filesystem::path& file) {
  auto fail = [&](const std::string& why) { throw JoinFileError("join output " + file.string() + " " + why); };
  std::ifstream is(file, std::ios::binary);
  if (!is) fail("cannot be read");
  std::vector<uint8_t> bytes((std::istreambuf_iterator<char>(is)), {});
  if (bytes.size() < kBody || std::memcmp(bytes.data(), kMagic, sizeof kMagic) != 0)
    fail("is not a tamis join output (no tamis-join signature)");
  uint64_t sum = 0;
  for (int k = 7; k >= 0; --k) sum = sum << 8 | bytes[16 + static_cast<size_t>(k)];
  if (XXH3_64bits(bytes.data() + kBody, bytes.size() - kBody) != sum) fail("is damaged or cut short (checksum mismatch)");
  JoinSlice s;
  try {
    const json j = parse_cbor(bytes.data() + kBody, bytes.data() + bytes.size());
    if (j.at("format") != "tamis-join") fail("is not a tamis join output");
    s.tool = j.at("tool").get<std::string>();
    const uint64_t k = j.at("slice").at(0).get<uint64_t>(), n = j.at("slice").at(1).get<uint64_t>();
    if (n < 1 || n > kMaxShards || k >= n) fail("is damaged (slice out of range)");
    s.slice = {static_cast<uint32_t>(k), static_cast<uint32_t>(n)};
    const auto& key = j.at("groups_key").get_binary();
    s.groups_key.assign(key.begin(), key.end());
    s.parts_key = j.at("parts_key").get<uint64_t>();
    s.records = j.at("records").get<uint64_t>();
    s.links.candidate_hits = j.at("candidate_hits").get<uint64_t>();
    for (const auto& l : j.at("links")) {
      GroupLink g{l.at(0).get<uint32_t>(), l.at(1).get<uint32_t>(), l.at(2).get<int>(), l.at(3).get<float>(),
                  l.at(4).get<int>(),      l.at(5).get<bool>(),     l.at(6).get<int>(),
                  l.size() > 7 && l.at(7).get<bool>(),
                  l.size() > 8 ? l.at(8).get<int>() : 0};
      if (!link_in_range(g, s.records) || g.turn < 0) fail("is damaged (a pair out of range)");
      s.links.links.push_back(g);
    }
  } catch (const JoinFileError&) {
    throw;
  } catch (const std::exception& e) {
    fail(std::string("is damaged: ") + e.what());
  }
  return s;
}

bool is_join_file(const std::filesystem::path& file) {
  std::ifstream is(file, std::ios::binary);
  char head[sizeof kMagic] = {};
  return is.read(head, sizeof head) && std::memcmp(head, kMagic, sizeof kMagic) == 0;
}

}  // namespace tamis
