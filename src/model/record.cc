#include "tamis/model/record.h"

#include <algorithm>
#include <cstring>

#include "tamis/base/memory.h"

namespace tamis {

std::string_view to_string(Format f) {
  switch (f) {
    case Format::png: return "png";
    case Format::jpeg: return "jpeg";
    case Format::gif: return "gif";
    case Format::bmp: return "bmp";
    case Format::webp: return "webp";
    case Format::tiff: return "tiff";
    case Format::pnm: return "pnm";
    case Format::unknown: break;
  }
  return "unknown";
}

std::string_view to_string(ColorMode m) {
  switch (m) {
    case ColorMode::gray: return "gray";
    case ColorMode::graya: return "graya";
    case ColorMode::rgb: return "rgb";
    case ColorMode::rgba: return "rgba";
    case ColorMode::palette: return "palette";
    case ColorMode::cmyk: return "cmyk";
    case ColorMode::unknown: break;
  }
  return "unknown";
}

std::string_view to_string(FileKind k) {
  switch (k) {
    case FileKind::image: return "image";
    case FileKind::mask: return "mask";
    case FileKind::unreadable: return "unreadable";
    case FileKind::ignored: return "ignored";
  }
  return "ignored";
}

std::string_view defect_code(Defect d) {
  switch (d) {
    case Defect::none: return "none";
    case Defect::hidden: return "hidden";
    case Defect::not_an_image: return "not-an-image";
    case Defect::io_error: return "io-error";
    case Defect::empty_file: return "empty-file";
    case Defect::unknown_format: return "unknown-format";
    case Defect::bad_header: return "bad-header";
    case Defect::truncated: return "truncated";
    case Defect::bad_checksum: return "bad-checksum";
    case Defect::too_many_pixels: return "too-many-pixels";
    case Defect::too_many_bytes: return "too-many-bytes";
    case Defect::decode_failed: return "decode-failed";
    case Defect::decode_warning: return "corrupt-data";
    case Defect::no_decoder: return "no-decoder";
    case Defect::unsupported_variant: return "unsupported-variant";
    case Defect::over_memory_budget: return "over-memory-budget";
  }
  return "none";
}

std::string_view defect_message(Defect d) {
  switch (d) {
    case Defect::none: return "";
    case Defect::hidden: return "hidden file or inside a hidden folder";
    case Defect::not_an_image: return "not an image (no image signature, no image extension)";
    case Defect::io_error: return "the file could not be opened or read";
    case Defect::empty_file: return "the file is empty (zero bytes)";
    case Defect::unknown_format: return "image extension, but the bytes are not a known image format";
    case Defect::bad_header: return "the image header is malformed or inconsistent";
    case Defect::truncated: return "the file ends before the image data does (truncated)";
    case Defect::bad_checksum: return "a PNG chunk checksum (CRC) does not match: the data is damaged";
    case Defect::too_many_pixels: return "the header claims more pixels than the configured limit";
    case Defect::too_many_bytes: return "the file is larger than the configured byte limit";
    case Defect::decode_failed: return "the decoder rejected the image data";
    case Defect::decode_warning: return "the decoder reported corrupt image data";
    case Defect::no_decoder: return "an image format this build cannot decode";
    case Defect::unsupported_variant:
      return "a variant of the format that this build's decoder does not implement (for example 12-bit or lossless JPEG)";
    case Defect::over_memory_budget:
      return "decoding it would take more memory than one image may use (--image-memory-mb raises the budget)";
  }
  return "";
}

ThumbnailTable::ThumbnailTable(const ThumbnailTable& other)
    : n_(other.n_), all_(other.all_), file_(other.file_), chroma_at_(other.chroma_at_), slot_(other.slot_), data_(other.data_) {
  if (other.chroma_used_) chroma_used_ = std::make_unique<std::atomic<uint32_t>>(other.chroma_used_->load());
  if (other.dense_) {
    dense_.reset(new Thumbnail[std::max<size_t>(n_, 1)]);
    std::copy_n(other.dense_.get(), n_, dense_.get());
  }
}

ThumbnailTable& ThumbnailTable::operator=(const ThumbnailTable& other) {
  if (this != &other) {
    ThumbnailTable copy(other);
    *this = std::move(copy);
  }
  return *this;
}

void ThumbnailTable::assign_all(size_t records, bool zeroed) {
  n_ = records;
  all_ = true;
  file_.reset();
  slot_.clear();
  slot_.shrink_to_fit();
  data_.clear();
  data_.shrink_to_fit();
  dense_.reset();
  chroma_at_.clear();
  chroma_at_.shrink_to_fit();
  chroma_used_.reset();
  dense_.reset(new Thumbnail[std::max<size_t>(records, 1)]);  // default-initialised: not written yet
  advise_huge_pages(dense_.get(), records * sizeof(Thumbnail));
  if (zeroed) std::fill_n(dense_.get(), records, Thumbnail{});
}

void ThumbnailTable::assign_none(size_t records) {
  n_ = records;
  all_ = false;
  dense_.reset();
  file_.reset();
  chroma_at_.clear();
  chroma_at_.shrink_to_fit();
  chroma_used_.reset();
  slot_.assign(records, kNone);
  data_.clear();
  data_.shrink_to_fit();
}

void ThumbnailTable::assign_spilled(size_t records, const std::filesystem::path& dir) {
  auto file = std::make_shared<SpillFile>(dir, static_cast<uint64_t>(records) * sizeof(Thumbnail));
  assign_none(0);
  n_ = records;
  all_ = true;
  file_ = std::move(file);
  chroma_at_.assign(records, kZeroChroma);
  chroma_used_ = std::make_unique<std::atomic<uint32_t>>(0);
}

bool neutral_chroma(const Thumbnail& t) {
  static const std::array<uint8_t, 2 * kChromaPlane> neutral = [] {
    std::array<uint8_t, 2 * kChromaPlane> a;
    a.fill(128);
    return a;
  }();
  return std::memcmp(t.data() + kGrayBytes, neutral.data(), neutral.size()) == 0;
}

// A spilled record's chroma slot for t's chroma planes: its pool slot when it has
// one (a record keeps it once given, whatever is written later: at most one
// slot a record, so the pool never outgrows the file); else kZeroChroma or
// kNeutralChroma when they are all 0 or all 128; else a new pool slot.
uint32_t ThumbnailTable::chroma_slot(size_t record, const Thumbnail& t) {
  const uint32_t had = chroma_at_[record];
  if (had != kZeroChroma && had != kNeutralChroma) return had;
  static const std::array<uint8_t, 2 * kChromaPlane> zero{};
  if (neutral_chroma(t)) return kNeutralChroma;
  if (std::memcmp(t.data() + kGrayBytes, zero.data(), zero.size()) == 0) return kZeroChroma;
  return chroma_used_->fetch_add(1, std::memory_order_relaxed);
}

void ThumbnailTable::fill_chroma(uint32_t slot, uint8_t* chroma) const {
  if (slot == kZeroChroma || slot == kNeutralChroma)
    std::fill_n(chroma, 2 * kChromaPlane, slot == kZeroChroma ? uint8_t{0} : uint8_t{128});
  else
    file_->read_at(pool_offset(slot), chroma, 2 * kChromaPlane);
}

void ThumbnailTable::make_room(const std::vector<uint32_t>& which) {
  if (all_) return;
  size_t more = 0;
  for (uint32_t r : which) more += r < n_ && slot_[r] == kNone;
  if (data_.capacity() < data_.size() + more) data_.reserve(std::max(data_.size() + more, 2 * data_.capacity()));
  for (uint32_t r : which)
    if (r < n_ && slot_[r] == kNone) {
      slot_[r] = static_cast<uint32_t>(data_.size());
      data_.emplace_back();
    }
}

void ThumbnailTable::get(size_t record, Thumbnail& out) const {
  if (!file_) {
    out = at(record);
    return;
  }
  file_->read_at(static_cast<uint64_t>(record) * kGrayBytes, out.data(), kGrayBytes);
  fill_chroma(chroma_at_[record], out.data() + kGrayBytes);
}

void ThumbnailTable::put(size_t record, const Thumbnail& t) {
  if (!file_) {
    at(record) = t;
    return;
  }
  file_->write_at(static_cast<uint64_t>(record) * kGrayBytes, t.data(), kGrayBytes);
  const uint32_t slot = chroma_slot(record, t);
  if (slot != kZeroChroma && slot != kNeutralChroma) file_->write_at(pool_offset(slot), t.data() + kGrayBytes, 2 * kChromaPlane);
  chroma_at_[record] = slot;
}

void ThumbnailTable::put_range(size_t first, size_t count, const Thumbnail* data) {
  if (!file_) {
    for (size_t k = 0; k < count; ++k) at(first + k) = data[k];
    return;
  }
  // The gray planes in one write; the chroma that needs the pool in as few
  // writes as there are runs of consecutive slots.
  std::vector<uint8_t> buf(count * kGrayBytes);
  for (size_t k = 0; k < count; ++k) std::copy_n(data[k].data(), kGrayBytes, buf.data() + k * kGrayBytes);
  file_->write_at(static_cast<uint64_t>(first) * kGrayBytes, buf.data(), buf.size());
  buf.clear();
  uint32_t run_start = kNone, run_next = kNone;
  auto flush = [&]() {
    if (!buf.empty()) file_->write_at(pool_offset(run_start), buf.data(), buf.size());
    buf.clear();
  };
  for (size_t k = 0; k < count; ++k) {
    const uint32_t slot = chroma_slot(first + k, data[k]);
    chroma_at_[first + k] = slot;
    if (slot == kZeroChroma || slot == kNeutralChroma) continue;
    if (slot != run_next) {
      flush();
      run_start = slot;
    }
    buf.insert(buf.end(), data[k].data() + kGrayBytes, data[k].data() + sizeof(Thumbnail));
    run_next = slot + 1;
  }
  flush();
}

void ThumbnailTable::get_many(const uint32_t* which, size_t count, Thumbnail* out) const {
  if (!file_) {
    for (size_t k = 0; k < count; ++k) out[k] = at(which[k]);
    return;
  }
  // Runs of consecutive records, one read each for their gray planes, and runs
  // of consecutive pool slots, one read each for their chroma.
  std::vector<uint8_t> buf;
  for (size_t k = 0; k < count;) {
    size_t e = k + 1;
    while (e < count && which[e] == which[e - 1] + 1) ++e;
    buf.resize((e - k) * kGrayBytes);
    file_->read_at(static_cast<uint64_t>(which[k]) * kGrayBytes, buf.data(), buf.size());
    for (size_t q = k; q < e; ++q) std::copy_n(buf.data() + (q - k) * kGrayBytes, kGrayBytes, out[q].data());
    k = e;
  }
  constexpr size_t kChroma = 2 * kChromaPlane;
  for (size_t k = 0; k < count;) {
    const uint32_t slot = chroma_at_[which[k]];
    if (slot == kZeroChroma || slot == kNeutralChroma) {
      fill_chroma(slot, out[k].data() + kGrayBytes);
      ++k;
      continue;
    }
    size_t e = k + 1;
    while (e < count && chroma_at_[which[e]] == slot + (e - k)) ++e;
    buf.resize((e - k) * kChroma);
    file_->read_at(pool_offset(slot), buf.data(), buf.size());
    for (size_t q = k; q < e; ++q) std::copy_n(buf.data() + (q - k) * kChroma, kChroma, out[q].data() + kGrayBytes);
    k = e;
  }
}

void ThumbnailTable::keep_only(const std::vector<uint32_t>& which) {
  std::vector<uint32_t> kept;
  for (uint32_t r : which)
    if (has(r)) kept.push_back(r);
  std::sort(kept.begin(), kept.end());
  kept.erase(std::unique(kept.begin(), kept.end()), kept.end());
  std::vector<Thumbnail> data(kept.size());
  get_many(kept.data(), kept.size(), data.data());
  assign_none(n_);
  for (size_t k = 0; k < kept.size(); ++k) slot_[kept[k]] = static_cast<uint32_t>(k);
  data_ = std::move(data);
}

}  // namespace tamis
