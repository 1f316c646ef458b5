#include "tamis/model/record.h"

#include <algorithm>

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
    : n_(other.n_), all_(other.all_), file_(other.file_), slot_(other.slot_), data_(other.data_) {
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
  dense_.reset(new Thumbnail[std::max<size_t>(records, 1)]);  // default-initialised: not written yet
  advise_huge_pages(dense_.get(), records * sizeof(Thumbnail));
  if (zeroed) std::fill_n(dense_.get(), records, Thumbnail{});
}

void ThumbnailTable::assign_none(size_t records) {
  n_ = records;
  all_ = false;
  dense_.reset();
  file_.reset();
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
  if (file_)
    file_->read_at(static_cast<uint64_t>(record) * sizeof(Thumbnail), out.data(), out.size());
  else
    out = at(record);
}

void ThumbnailTable::put(size_t record, const Thumbnail& t) {
  if (file_)
    file_->write_at(static_cast<uint64_t>(record) * sizeof(Thumbnail), t.data(), t.size());
  else
    at(record) = t;
}

void ThumbnailTable::put_range(size_t first, size_t count, const Thumbnail* data) {
  if (file_)
    file_->write_at(static_cast<uint64_t>(first) * sizeof(Thumbnail), data, count * sizeof(Thumbnail));
  else
    for (size_t k = 0; k < count; ++k) at(first + k) = data[k];
}

void ThumbnailTable::get_many(const uint32_t* which, size_t count, Thumbnail* out) const {
  if (!file_) {
    for (size_t k = 0; k < count; ++k) out[k] = at(which[k]);
    return;
  }
  // Runs of consecutive records, one read each (Thumbnail is a byte array: no padding).
  static_assert(sizeof(Thumbnail) == kGrayBytes + 2 * kChromaPlane);
  for (size_t k = 0; k < count;) {
    size_t e = k + 1;
    while (e < count && which[e] == which[e - 1] + 1) ++e;
    file_->read_at(static_cast<uint64_t>(which[k]) * sizeof(Thumbnail), out[k].data(), (e - k) * sizeof(Thumbnail));
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
