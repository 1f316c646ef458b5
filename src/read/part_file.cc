#include "tamis/read/part_file.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <bit>
#include <cerrno>
#include <cstring>
#include <memory>
#include <span>

#include <nlohmann/json.hpp>
#include <xxhash.h>

#include "tamis/model/cbor_reader.h"
#include "tamis/model/record_codec.h"
#include "tamis/version.h"

namespace tamis {

using nlohmann::json;

namespace {

constexpr char kMagic[16] = {'\x89', 't', 'a', 'm', 'i', 's', '-', 'p', 'a', 'r', 't', '\r', '\n', '\x1a', '\n', '\0'};
constexpr char kEnd[8] = {'t', 'a', 'm', 'i', 's', 'e', 'n', 'd'};
constexpr size_t kHeader = 64, kTrailer = 24, kTableEntry = 16;
// A table entry's record index carries this bit when its thumbnail is stored as
// the gray plane alone (neutral chroma: 1,024 bytes instead of 3,072).
constexpr uint64_t kGrayOnly = uint64_t{1} << 63;
constexpr uint64_t kMaxMeta = 1ull << 34;  // a meta block past 16 GB is no part this tool wrote
// Why a read of a part that opened whole fails: it changed since.
constexpr const char* kReadAgain = "cannot be read (cut short while in use?)";
constexpr uint64_t kMinRecordBytes = 4 + 1 + 25 + detail::kRecordBytesHead;

void put_u64(uint8_t* p, uint64_t v) {
  for (int k = 0; k < 8; ++k) p[k] = static_cast<uint8_t>(v >> (8 * k));
}
void put_u32(uint8_t* p, uint32_t v) {
  for (int k = 0; k < 4; ++k) p[k] = static_cast<uint8_t>(v >> (8 * k));
}
uint64_t get_u64(const uint8_t* p) {
  uint64_t v = 0;
  for (int k = 7; k >= 0; --k) v = v << 8 | p[k];
  return v;
}
uint32_t get_u32(const uint8_t* p) {
  uint32_t v = 0;
  for (int k = 3; k >= 0; --k) v = v << 8 | p[k];
  return v;
}

json bin(const std::string& s) { return json::binary(std::vector<uint8_t>(s.begin(), s.end())); }
json bins(const std::vector<std::string>& v) {
  json a = json::array();
  for (const auto& s : v) a.push_back(bin(s));
  return a;
}
std::string str(const json& j) {
  if (!j.is_binary()) throw std::runtime_error("expected a byte string");
  const auto& b = j.get_binary();
  return std::string(b.begin(), b.end());
}
std::vector<std::string> strs(const json& j) {
  std::vector<std::string> out;
  if (!j.is_array()) throw std::runtime_error("expected an array");
  for (const auto& e : j) out.push_back(str(e));
  if (!std::is_sorted(out.begin(), out.end())) throw std::runtime_error("a list out of order");
  return out;
}

struct Hashes {
  std::unique_ptr<XXH3_state_t, decltype(&XXH3_freeState)> head{XXH3_createState(), &XXH3_freeState};
  std::unique_ptr<XXH3_state_t, decltype(&XXH3_freeState)> whole{XXH3_createState(), &XXH3_freeState};
  Hashes() {
    XXH3_64bits_reset(head.get());
    XXH3_64bits_reset(whole.get());
  }
};

}  // namespace

void write_part(std::ostream& os, const ScanPart& p) {
  json meta = {{"format", "tamis-part"},
               {"tool", p.tool.empty() ? std::string(kToolVersion) : p.tool},
               {"root", bin(p.root)},
               {"read", {{"max_pixels", p.decode.max_pixels}, {"max_image_bytes", p.decode.max_image_bytes},
                         {"reduced_side", p.decode.reduced_side}, {"block_above_pixels", p.decode.block_above_pixels},
                         {"max_bytes", p.max_bytes}}},
               {"read_key", bin(p.read_key)},
               {"shard", {p.shard.index, p.shard.count}},
               {"walk", {{"links", bins(p.walk.links)}, {"special", bins(p.walk.special)},
                         {"unreadable_dirs", bins(p.walk.unreadable_dirs)}, {"dirs", bins(p.walk.dirs)}}},
               {"counts", {p.counts.read, p.counts.cached, p.counts.cached_by_hash, p.counts.moved}},
               {"note", bin(p.note)}};
  std::vector<uint8_t> meta_bytes;
  json::to_cbor(meta, meta_bytes);
  // Records, coded once into memory (about 150 bytes each), and the thumbnails' table.
  std::vector<uint8_t> recs, one;
  std::vector<uint32_t> with_thumb;
  for (uint32_t i = 0; i < p.records.size(); ++i) {
    const FileRecord& r = p.records[i];
    uint8_t fixed[28];
    put_u32(fixed, static_cast<uint32_t>(r.path.size()));
    recs.insert(recs.end(), fixed, fixed + 4);
    recs.insert(recs.end(), r.path.begin(), r.path.end());
    put_u64(fixed, r.size);
    put_u64(fixed + 8, static_cast<uint64_t>(r.mtime_ns));
    put_u64(fixed + 16, r.inode);
    one.clear();
    detail::record_to_bytes(r, one);
    fixed[24] = static_cast<uint8_t>(one.size());
    recs.insert(recs.end(), fixed, fixed + 25);
    recs.insert(recs.end(), one.begin(), one.end());
    if (r.features.has_lookalike) {
      if (!p.thumbs.has(i)) throw std::logic_error("write_part: a look-alike record without its thumbnail");
      with_thumb.push_back(i);
    }
  }
  uint8_t head[kHeader] = {};
  std::memcpy(head, kMagic, sizeof kMagic);
  put_u32(head + 16, kPartVersion);
  put_u64(head + 24, meta_bytes.size());
  put_u64(head + 32, p.records.size());
  put_u64(head + 40, recs.size());
  put_u64(head + 48, with_thumb.size());
  Hashes h;
  auto put = [&](const void* data, size_t n, bool in_head) {
    os.write(static_cast<const char*>(data), static_cast<std::streamsize>(n));
    if (in_head) XXH3_64bits_update(h.head.get(), data, n);
    XXH3_64bits_update(h.whole.get(), data, n);
  };
  put(head, kHeader, true);
  put(meta_bytes.data(), meta_bytes.size(), true);
  put(recs.data(), recs.size(), true);
  recs.clear();
  recs.shrink_to_fit();
  // The table needs each thumbnail's checksum: thumbnails are read twice, in
  // blocks (from memory, or in runs from a scratch file).
  constexpr size_t kBlock = 4096;
  std::vector<Thumbnail> block(std::min(kBlock, with_thumb.size()));
  for (size_t first = 0; first < with_thumb.size(); first += kBlock) {
    const size_t n = std::min(kBlock, with_thumb.size() - first);
    p.thumbs.get_many(with_thumb.data() + first, n, block.data());
    for (size_t k = 0; k < n; ++k) {
      // A gray picture's thumbnail (neutral chroma) is stored as its gray plane.
      const bool gray = neutral_chroma(block[k]);
      uint8_t entry[kTableEntry];
      put_u64(entry, with_thumb[first + k] | (gray ? kGrayOnly : 0));
      put_u64(entry + 8, XXH3_64bits(block[k].data(), gray ? kGrayBytes : block[k].size()));
      put(entry, kTableEntry, true);
    }
  }
  for (size_t first = 0; first < with_thumb.size(); first += kBlock) {
    const size_t n = std::min(kBlock, with_thumb.size() - first);
    p.thumbs.get_many(with_thumb.data() + first, n, block.data());
    for (size_t k = 0; k < n; ++k) put(block[k].data(), neutral_chroma(block[k]) ? kGrayBytes : block[k].size(), false);
  }
  uint8_t trailer[kTrailer];
  put_u64(trailer, XXH3_64bits_digest(h.head.get()));
  put_u64(trailer + 8, XXH3_64bits_digest(h.whole.get()));
  std::memcpy(trailer + 16, kEnd, sizeof kEnd);
  os.write(reinterpret_cast<const char*>(trailer), kTrailer);
  if (!os) throw std::runtime_error("the part could not be written");
}

void PartFile::fail(const std::string& why) const { throw PartError("part " + file_.string() + " " + why); }

namespace {
// A descriptor closed when the read is done (a released part's, opened for one read).
struct OneRead {
  int fd = -1;
  ~OneRead() {
    if (fd >= 0) ::close(fd);
  }
};
}  // namespace

void PartFile::read_at(uint64_t at, void* out, size_t n, const char* why) const {
  OneRead own;
  int fd = fd_;
  if (fd < 0) {  // released: open it for this read, and check that it is still the same file
    own.fd = ::open(file_.c_str(), O_RDONLY | O_CLOEXEC);
    struct stat st{};
    if (own.fd < 0 || ::fstat(own.fd, &st) != 0) fail(std::string("cannot be read again: ") + std::strerror(errno));
    const stat_key now{static_cast<uint64_t>(st.st_dev), static_cast<uint64_t>(st.st_ino), static_cast<uint64_t>(st.st_size),
                       int64_t{st.st_mtim.tv_sec} * 1000000000 + st.st_mtim.tv_nsec};
    if (!(now == key_)) fail("changed while the merge read it");
    fd = own.fd;
  }
  for (size_t done = 0; done < n;) {
    const ssize_t got = ::pread(fd, static_cast<char*>(out) + done, n - done, static_cast<off_t>(at + done));
    if (got < 0 && errno == EINTR) continue;
    if (got <= 0) fail(why);
    done += static_cast<size_t>(got);
  }
}

void PartFile::release() const {
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
}

PartFile::~PartFile() { release(); }

PartFile::PartFile(const std::filesystem::path& file) : file_(file) {
  fd_ = ::open(file.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd_ < 0) fail(std::string("cannot be read: ") + std::strerror(errno));
  struct stat st{};
  if (::fstat(fd_, &st) != 0 || !S_ISREG(st.st_mode)) fail("is not a regular file");
  size_ = static_cast<uint64_t>(st.st_size);
  key_ = {static_cast<uint64_t>(st.st_dev), static_cast<uint64_t>(st.st_ino), size_,
          int64_t{st.st_mtim.tv_sec} * 1000000000 + st.st_mtim.tv_nsec};
  const char* cut = "is cut short (truncated) or cannot be read";
  uint8_t head[kHeader];
  if (size_ < kHeader + kTrailer) fail("is not a tamis part (too short: truncated or another file)");
  read_at(0, head, kHeader, cut);
  if (std::memcmp(head, kMagic, sizeof kMagic) != 0) fail("is not a tamis part (no tamis-part signature)");
  const uint32_t version = get_u32(head + 16);
  if (version != kPartVersion)
    fail("has part format version " + std::to_string(version) + "; this tamis reads version " +
         std::to_string(kPartVersion) + " (scan again with this version)");
  const uint64_t meta_n = get_u64(head + 24), count = get_u64(head + 32), recs_n = get_u64(head + 40),
                 thumbs_n = get_u64(head + 48);
  // The length the header implies, computed without overflow.
  // (Bounds far above any part, so that the sum below cannot overflow.)
  if (meta_n > kMaxMeta || recs_n > (1ull << 50) || count > UINT32_MAX || thumbs_n > UINT32_MAX)
    fail("is damaged (its header gives impossible sizes)");
  // A record takes at least 84 bytes (a one-byte path and the record's 54), and
  // no record has two thumbnails: counts beyond that are no part's.
  if (count > recs_n / kMinRecordBytes || thumbs_n > count) fail("is damaged (its header gives impossible counts)");
  thumbs_at_ = kHeader + meta_n + recs_n + thumbs_n * kTableEntry;
  // The thumbnails take 1,024 bytes (gray) or 3,072 each, as the table says:
  // the table is read first when the file can hold it.
  uint64_t expect = thumbs_at_ + thumbs_n * kGrayBytes + kTrailer;
  std::vector<uint8_t> table(thumbs_n * kTableEntry);
  if (size_ >= expect) {
    read_at(kHeader + meta_n + recs_n, table.data(), table.size(), cut);
    for (uint64_t k = 0; k < thumbs_n; ++k)
      if (!(get_u64(table.data() + k * kTableEntry) & kGrayOnly)) expect += 2 * kChromaPlane;
  }
  if (expect != size_)
    fail(size_ < expect ? "is cut short (truncated): " + std::to_string(size_) + " bytes of " + std::to_string(expect)
                        : "is damaged (" + std::to_string(size_ - expect) + " bytes more than its header says)");
  uint8_t trailer[kTrailer];
  read_at(size_ - kTrailer, trailer, kTrailer, cut);
  if (std::memcmp(trailer + 16, kEnd, sizeof kEnd) != 0) fail("is damaged (no end mark)");
  head_sum_ = get_u64(trailer);
  file_sum_ = get_u64(trailer + 8);
  // The head (header, meta, records, table) is checked as it streams by; the
  // meta and the table are kept, the records are decoded later, one at a time
  // (RecordReader), so that a set of parts is never held twice.
  recs_at_ = kHeader + meta_n;
  recs_bytes_ = recs_n;
  count_ = count;
  std::vector<uint8_t> meta_bytes(meta_n);
  {
    std::unique_ptr<XXH3_state_t, decltype(&XXH3_freeState)> st(XXH3_createState(), &XXH3_freeState);
    XXH3_64bits_reset(st.get());
    std::vector<uint8_t> buf(std::min<uint64_t>(thumbs_at_, 4u << 20));
    const uint64_t table_at = recs_at_ + recs_n;
    for (uint64_t at = 0; at < thumbs_at_;) {
      const size_t n = static_cast<size_t>(std::min<uint64_t>(buf.size(), thumbs_at_ - at));
      read_at(at, buf.data(), n, cut);
      XXH3_64bits_update(st.get(), buf.data(), n);
      // Copy out the parts of this chunk that fall in the meta block and the table.
      auto keep = [&](uint64_t from, std::vector<uint8_t>& into) {
        const uint64_t lo = std::max(at, from), hi = std::min(at + n, from + into.size());
        if (lo < hi) std::memcpy(into.data() + (lo - from), buf.data() + (lo - at), static_cast<size_t>(hi - lo));
      };
      keep(kHeader, meta_bytes);
      (void)table_at;  // the table was read above; the checksum covers it here
      at += n;
    }
    if (XXH3_64bits_digest(st.get()) != head_sum_) fail("is damaged (checksum mismatch)");
  }
  try {
    const json meta = parse_cbor(meta_bytes.data(), meta_bytes.data() + meta_bytes.size());
    if (meta.at("format") != "tamis-part") fail("is not a tamis part");
    ScanPart& p = info_;
    p.tool = meta.at("tool").get<std::string>();
    p.root = str(meta.at("root"));
    const json& rd = meta.at("read");
    p.decode.max_pixels = rd.at("max_pixels").get<uint64_t>();
    p.decode.max_image_bytes = rd.at("max_image_bytes").get<uint64_t>();
    p.decode.reduced_side = rd.at("reduced_side").get<uint32_t>();
    p.decode.block_above_pixels = rd.at("block_above_pixels").get<uint64_t>();
    p.max_bytes = rd.at("max_bytes").get<uint64_t>();
    p.read_key = str(meta.at("read_key"));
    const json& sh = meta.at("shard");
    const uint64_t k = sh.at(0).get<uint64_t>(), n = sh.at(1).get<uint64_t>();
    if (n < 1 || n > kMaxShards || k >= n) fail("is damaged (its shard is out of range)");
    p.shard = {static_cast<uint32_t>(k), static_cast<uint32_t>(n)};
    const json& w = meta.at("walk");
    p.walk.links = strs(w.at("links"));
    p.walk.special = strs(w.at("special"));
    p.walk.unreadable_dirs = strs(w.at("unreadable_dirs"));
    p.walk.dirs = strs(w.at("dirs"));
    const auto c = meta.at("counts").get<std::vector<uint64_t>>();
    if (c.size() != 4) fail("is damaged (counts)");
    p.counts.read = c[0];
    p.counts.cached = c[1];
    p.counts.cached_by_hash = c[2];
    p.counts.moved = c[3];
    p.note = str(meta.at("note"));
    for (const auto* list : {&p.walk.links, &p.walk.special, &p.walk.unreadable_dirs, &p.walk.dirs})
      for (const auto& path : *list)
        if (shard_of(path, p.shard.count) != p.shard.index) fail("is damaged (an entry outside its shard)");
  } catch (const PartError&) {
    throw;
  } catch (const std::exception& e) {
    fail(std::string("is damaged: ") + e.what());
  }
  // The thumbnails' table: ascending records in range (RecordReader checks that
  // they are exactly the records with look-alike codes).
  thumb_record_.resize(thumbs_n);
  thumb_sum_.resize(thumbs_n);
  thumb_colour_.assign((thumbs_n + 63) / 64, 0);
  colour_before_.assign((thumbs_n + 63) / 64 + 1, 0);
  for (uint64_t k = 0; k < thumbs_n; ++k) {
    const uint64_t entry = get_u64(table.data() + k * kTableEntry), rec = entry & ~kGrayOnly;
    if (rec >= count || (k > 0 && rec <= thumb_record_[k - 1])) fail("is damaged (thumbnail table)");
    thumb_record_[k] = static_cast<uint32_t>(rec);
    thumb_sum_[k] = get_u64(table.data() + k * kTableEntry + 8);
    if (!(entry & kGrayOnly)) thumb_colour_[k / 64] |= uint64_t{1} << (k % 64);
  }
  for (size_t w = 0; w < thumb_colour_.size(); ++w)
    colour_before_[w + 1] = colour_before_[w] + static_cast<uint32_t>(std::popcount(thumb_colour_[w]));
}

PartFile::RecordReader::RecordReader(const PartFile& part) : part_(part), buf_(1u << 20) {}

void PartFile::RecordReader::fill(size_t need) {
  // Keeps the unread bytes, then reads on until `need` are at hand (or the block ends).
  if (have_ - at_ >= need) return;
  std::memmove(buf_.data(), buf_.data() + at_, have_ - at_);
  have_ -= at_;
  at_ = 0;
  if (buf_.size() < need) buf_.resize(need);
  const size_t want = static_cast<size_t>(std::min<uint64_t>(buf_.size() - have_, part_.recs_bytes_ - read_));
  part_.read_at(part_.recs_at_ + read_, buf_.data() + have_, want, kReadAgain);
  have_ += want;
  read_ += want;
  if (have_ < need) part_.fail("is damaged (records)");
}

bool PartFile::RecordReader::next(FileRecord& r) {
  if (index_ == part_.count_) {
    if (read_ != part_.recs_bytes_ || at_ != have_) part_.fail("is damaged (records)");
    if (thumb_ != part_.thumb_record_.size()) part_.fail("is damaged (thumbnail table)");
    return false;
  }
  fill(4);
  const uint32_t len = get_u32(buf_.data() + at_);
  if (len > part_.recs_bytes_) part_.fail("is damaged (records)");
  fill(4 + size_t{len} + 25);
  const uint8_t* at = buf_.data() + at_ + 4;
  std::string path(reinterpret_cast<const char*>(at), len);
  at += len;
  const uint64_t size = get_u64(at), mtime = get_u64(at + 8), inode = get_u64(at + 16);
  const uint8_t nb = at[24];
  fill(4 + size_t{len} + 25 + nb);
  at = buf_.data() + at_ + 4 + len + 25;
  if (!detail::record_from_bytes(std::span<const uint8_t>(at, nb), r)) part_.fail("is damaged (a record)");
  at_ += 4 + size_t{len} + 25 + nb;
  if (path.empty() || (index_ > 0 && !(last_ < path)) || shard_of(path, part_.info_.shard.count) != part_.info_.shard.index)
    part_.fail("is damaged (a record out of order or outside its shard)");
  last_ = path;
  r.path = std::move(path);
  r.size = size;
  r.mtime_ns = static_cast<int64_t>(mtime);
  r.inode = inode;
  // Exactly the records with look-alike codes have thumbnails, in order.
  const bool listed = thumb_ < part_.thumb_record_.size() && part_.thumb_record_[thumb_] == index_;
  if (listed != r.features.has_lookalike) part_.fail("is damaged (thumbnail table)");
  thumbnail_ = listed ? static_cast<int64_t>(thumb_++) : -1;
  ++index_;
  return true;
}

std::vector<FileRecord> PartFile::read_records() const {
  std::vector<FileRecord> out(count_);
  RecordReader reader(*this);
  for (auto& r : out) reader.next(r);
  FileRecord end;
  if (reader.next(end)) fail("is damaged (records)");
  return out;
}

bool PartFile::thumbnail_in_colour(size_t k) const { return (thumb_colour_[k / 64] >> (k % 64)) & 1; }

uint64_t PartFile::thumbnail_offset(size_t k) const {
  const uint64_t below = k % 64 == 0 ? 0 : thumb_colour_[k / 64] & ((uint64_t{1} << (k % 64)) - 1);
  const uint64_t colour = colour_before_[k / 64] + static_cast<uint64_t>(std::popcount(below));
  return thumbs_at_ + uint64_t(k) * kGrayBytes + colour * 2 * kChromaPlane;
}

void PartFile::read_thumbnails(size_t first, size_t count, Thumbnail* out) const {
  if (first > thumb_record_.size() || count > thumb_record_.size() - first) fail("thumbnail out of range");
  if (count == 0) return;
  // One read of the stored bytes, then each thumbnail put in place from the
  // last one back (a gray one stored as 1,024 bytes gets neutral chroma), so
  // that `out` itself serves as the buffer.
  const uint64_t from = thumbnail_offset(first), to = thumbnail_offset(first + count - 1) +
                                                         (thumbnail_in_colour(first + count - 1) ? sizeof(Thumbnail) : kGrayBytes);
  uint8_t* bytes = out[0].data();
  read_at(from, bytes, static_cast<size_t>(to - from), kReadAgain);
  for (size_t k = count; k-- > 0;) {
    const size_t at = static_cast<size_t>(thumbnail_offset(first + k) - from);
    const bool colour = thumbnail_in_colour(first + k);
    const size_t stored = colour ? sizeof(Thumbnail) : kGrayBytes;
    if (XXH3_64bits(bytes + at, stored) != thumb_sum_[first + k]) fail("is damaged (a thumbnail's checksum)");
    std::memmove(out[k].data(), bytes + at, stored);
    if (!colour) std::memset(out[k].data() + kGrayBytes, 128, 2 * kChromaPlane);
  }
}

void PartFile::verify() const {
  std::unique_ptr<XXH3_state_t, decltype(&XXH3_freeState)> st(XXH3_createState(), &XXH3_freeState);
  XXH3_64bits_reset(st.get());
  std::vector<char> buf(1 << 20);
  const uint64_t stop = size_ - kTrailer;
  for (uint64_t at = 0; at < stop;) {
    const size_t want = static_cast<size_t>(std::min<uint64_t>(buf.size(), stop - at));
    read_at(at, buf.data(), want, kReadAgain);
    XXH3_64bits_update(st.get(), buf.data(), want);
    at += want;
  }
  if (XXH3_64bits_digest(st.get()) != file_sum_) fail("is damaged (checksum mismatch)");
}

}  // namespace tamis
