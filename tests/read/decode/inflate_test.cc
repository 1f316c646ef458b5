// tamis's small-stream inflate against zlib (Debian zlib1g), the reference
// implementation of RFC 1950/1951: on streams zlib makes at every level and
// strategy it must give zlib's bytes (or decline, which the caller hands to
// zlib), and on damaged streams it may only accept what zlib accepts, with
// zlib's bytes.
#include <catch2/catch.hpp>

#include <zlib.h>

#include <cstring>
#include <vector>

#include "support/fashion_mnist.h"
#include "tamis/base/random.h"
#include "tamis/read/decode/inflate.h"

using namespace tamis;

namespace {

std::vector<uint8_t> deflate_with(const std::vector<uint8_t>& data, int level, int strategy) {
  z_stream z{};
  REQUIRE(deflateInit2(&z, level, Z_DEFLATED, 15, 8, strategy) == Z_OK);
  std::vector<uint8_t> out(deflateBound(&z, data.size()) + 16);
  z.next_in = const_cast<Bytef*>(data.data());
  z.avail_in = static_cast<uInt>(data.size());
  z.next_out = out.data();
  z.avail_out = static_cast<uInt>(out.size());
  REQUIRE(deflate(&z, Z_FINISH) == Z_STREAM_END);
  out.resize(z.total_out);
  deflateEnd(&z);
  return out;
}

// zlib's verdict on `in` as a stream of exactly `size` bytes with nothing after it.
bool zlib_exact(const std::vector<uint8_t>& in, size_t size, std::vector<uint8_t>& out) {
  z_stream z{};
  if (inflateInit(&z) != Z_OK) return false;
  out.assign(size + 1, 0);  // one spare byte: zlib refuses a null output pointer
  z.next_in = const_cast<Bytef*>(in.data());
  z.avail_in = static_cast<uInt>(in.size());
  z.next_out = out.data();
  z.avail_out = static_cast<uInt>(size);
  const int rc = inflate(&z, Z_FINISH);
  const bool ok = rc == Z_STREAM_END && z.avail_out == 0 && z.avail_in == 0;
  inflateEnd(&z);
  out.resize(size);
  return ok;
}

std::vector<std::vector<uint8_t>> sample_data() {
  std::vector<std::vector<uint8_t>> out;
  SplitMix64 rng(5);
  out.push_back({});                               // empty
  out.push_back(std::vector<uint8_t>(1, 'x'));     // one byte
  out.push_back(std::vector<uint8_t>(70000, 0));   // long runs
  std::vector<uint8_t> noise(5000);
  for (auto& b : noise) b = static_cast<uint8_t>(rng.below(256));
  out.push_back(noise);                            // incompressible
  std::string text;
  for (int i = 0; i < 400; ++i) text += "the quick brown fox " + std::to_string(i * 7919 % 1000) + " jumps; ";
  out.emplace_back(text.begin(), text.end());      // repetitive text, distances of all sizes
  std::vector<uint8_t> skewed(20000);
  for (auto& b : skewed) b = static_cast<uint8_t>(rng.below(4) == 0 ? rng.below(256) : rng.below(3));
  out.push_back(skewed);                           // very unequal frequencies: long codes
  // Fashion-MNIST images as PNG rows (filter byte 0 and 28 pixels), as the direct path meets them.
  const auto fm = test::read_idx_images(test::kFashionMnistDir / "t10k-images-idx3-ubyte.gz");
  for (uint32_t k = 0; k < 40; ++k) {
    std::vector<uint8_t> rows;
    for (int y = 0; y < 28; ++y) {
      rows.push_back(0);
      const uint8_t* p = fm.pixels.data() + size_t{k} * 784 + size_t(y) * 28;
      rows.insert(rows.end(), p, p + 28);
    }
    out.push_back(rows);
  }
  return out;
}

}  // namespace

TEST_CASE("small-stream inflate gives zlib's bytes at every level and strategy", "[inflate]") {
  size_t streams = 0, declined = 0;
  for (const auto& data : sample_data())
    for (int level : {0, 1, 6, 9})
      for (int strategy : {Z_DEFAULT_STRATEGY, Z_FILTERED, Z_HUFFMAN_ONLY, Z_RLE, Z_FIXED}) {
        const auto z = deflate_with(data, level, strategy);
        std::vector<uint8_t> out(data.size() + 1, 0xAA);
        ++streams;
        INFO("size " << data.size() << " level " << level << " strategy " << strategy);
        if (!inflate_small(z, out.data(), data.size())) {
          ++declined;
          continue;
        }
        CHECK((data.empty() || std::memcmp(out.data(), data.data(), data.size()) == 0));
        CHECK(out[data.size()] == 0xAA);  // nothing written past the end
        // The wrong size, or a byte after the stream: declined.
        if (!data.empty()) CHECK_FALSE(inflate_small(z, out.data(), data.size() - 1));
        CHECK_FALSE(inflate_small(z, out.data(), data.size() + 1));
        auto longer = z;
        longer.push_back(0);
        CHECK_FALSE(inflate_small(longer, out.data(), data.size()));
      }
  INFO(declined << " of " << streams << " declined");
  CHECK(declined * 20 <= streams);  // it is worth having: zlib's streams nearly all pass
}

TEST_CASE("small-stream inflate accepts a damaged stream only where zlib does, with zlib's bytes", "[inflate]") {
  SplitMix64 rng(17);
  size_t mutants = 0, accepted = 0, wrong = 0;
  for (const auto& data : sample_data()) {
    if (data.size() > 21000) continue;
    for (int strategy : {Z_DEFAULT_STRATEGY, Z_FIXED, Z_HUFFMAN_ONLY}) {
      const auto z = deflate_with(data, 6, strategy);
      for (int m = 0; m < 60; ++m) {
        auto bad = z;
        switch (m % 3) {
          case 0: bad[rng.below(bad.size())] ^= static_cast<uint8_t>(1u << rng.below(8)); break;  // one bit
          case 1: bad[rng.below(bad.size())] = static_cast<uint8_t>(rng.below(256)); break;        // one byte
          default: bad.resize(rng.below(bad.size())); break;                                        // cut short
        }
        std::vector<uint8_t> ours(data.size() + 64), theirs;
        ++mutants;
        if (!inflate_small(bad, ours.data(), data.size())) continue;
        ++accepted;
        const bool zlib_ok = zlib_exact(bad, data.size(), theirs);
        const bool differs = !zlib_ok || std::memcmp(ours.data(), theirs.data(), data.size()) != 0;
        wrong += differs;
      }
    }
  }
  INFO(accepted << " of " << mutants << " damaged streams accepted");
  CHECK(mutants > 2000);
  CHECK(wrong == 0);
}
