#include "tamis/report/outputs.h"

#include <turbojpeg.h>

#include <opencv2/imgproc.hpp>

#include <algorithm>
#include <cmath>
#include <exception>
#include <map>
#include <optional>
#include <stdexcept>
#include <thread>
#include <vector>

#include "tamis/base/atomic_file.h"
#include "tamis/place/checks.h"
#include "tamis/read/preview.h"
#include "tamis/read/walk.h"
#include "tamis/report/index_file.h"
#include "tamis/report/junit.h"
#include "tamis/report/manifest.h"
#include "tamis/report/report_html.h"
#include "tamis/report/report_json.h"

namespace tamis {

namespace {

std::string base64(const std::vector<uchar>& in) {
  static const char* t = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  out.reserve((in.size() + 2) / 3 * 4);
  for (size_t i = 0; i < in.size(); i += 3) {
    uint32_t v = uint32_t{in[i]} << 16;
    if (i + 1 < in.size()) v |= uint32_t{in[i + 1]} << 8;
    if (i + 2 < in.size()) v |= in[i + 2];
    out.push_back(t[(v >> 18) & 63]);
    out.push_back(t[(v >> 12) & 63]);
    out.push_back(i + 1 < in.size() ? t[(v >> 6) & 63] : '=');
    out.push_back(i + 2 < in.size() ? t[v & 63] : '=');
  }
  return out;
}

// A gray (channels 1) or RGB (channels 3) image as baseline JPEG, chroma not
// subsampled (libjpeg-turbo); empty on failure.
std::vector<uint8_t> encode_jpeg(const uint8_t* pixels, int width, int height, int channels, int quality) {
  std::vector<uint8_t> out;
  tjhandle tj = tjInitCompress();
  if (!tj) return out;
  unsigned char* buf = nullptr;
  unsigned long size = 0;
  const bool gray = channels == 1;
  if (tjCompress2(tj, pixels, width, width * channels, height, gray ? TJPF_GRAY : TJPF_RGB, &buf, &size,
                  gray ? TJSAMP_GRAY : TJSAMP_444, quality, 0) == 0)
    out.assign(buf, buf + size);
  tjFree(buf);
  tjDestroy(tj);
  return out;
}

// A mask drawn over an RGB colour: the report's ochre (#e36414) laid on in
// proportion to the mask's value against its brightest, at most 0.6.
void ochre_over(double c[3], uint8_t value, uint8_t top) {
  const double a = 0.6 * value / top;
  const double tint[3] = {227, 100, 20};
  for (int k = 0; k < 3; ++k) c[k] = c[k] * (1 - a) + tint[k] * a;
}

// The look-alike thumbnail in colour, 32x32 RGB: its gray plane as luma and its
// chroma (OpenCV's 8-bit YCrCb, BT.601), converted back with the BT.601
// coefficients. Computed in double, so the same on every processor. With `mask`,
// the mask's thumbnail is drawn over it in ochre, in proportion to the mask's
// share of its brightest value.
std::vector<uint8_t> colour_thumbnail(const Thumbnail& t, const Thumbnail* mask = nullptr) {
  std::vector<uint8_t> rgb(static_cast<size_t>(kThumbSide * kThumbSide * 3));
  const uint8_t* cb = t.data() + kGrayBytes;
  const uint8_t* cr = cb + kChromaPlane;
  uint8_t mask_top = 0;
  if (mask)
    for (int i = 0; i < kThumbSide * kThumbSide; ++i) mask_top = std::max(mask_top, (*mask)[static_cast<size_t>(i)]);
  for (int y = 0; y < kThumbSide; ++y)
    for (int x = 0; x < kThumbSide; ++x) {
      const size_t i = static_cast<size_t>(y * kThumbSide + x);
      const double Y = t[i], u = double(cb[i]) - 128.0, v = double(cr[i]) - 128.0;
      double c[3] = {Y + 1.403 * v, Y - 0.714 * v - 0.344 * u, Y + 1.773 * u};
      if (mask && mask_top > 0) ochre_over(c, (*mask)[static_cast<size_t>(y * kThumbSide + x)], mask_top);
      for (int k = 0; k < 3; ++k)
        rgb[static_cast<size_t>((y * kThumbSide + x) * 3 + k)] = static_cast<uint8_t>(std::clamp(std::lround(c[k]), 0L, 255L));
    }
  return rgb;
}

// The picture `img` (a preview, BGR) as RGB, or as gray for a mask, with the
// mask preview `mask` (when not empty) drawn over it in ochre as
// colour_thumbnail draws it.
std::vector<uint8_t> preview_pixels(const cv::Mat& img, bool gray, const cv::Mat& mask) {
  const int channels = gray ? 1 : 3;
  std::vector<uint8_t> px(static_cast<size_t>(img.cols) * img.rows * channels);
  cv::Mat m;
  uint8_t top = 0;
  if (!mask.empty()) {
    cv::resize(mask, m, img.size(), 0, 0, cv::INTER_AREA);
    for (int y = 0; y < m.rows; ++y)
      for (int x = 0; x < m.cols; ++x) top = std::max(top, m.at<cv::Vec3b>(y, x)[1]);
  }
  for (int y = 0; y < img.rows; ++y)
    for (int x = 0; x < img.cols; ++x) {
      const cv::Vec3b p = img.at<cv::Vec3b>(y, x);
      uint8_t* o = &px[(static_cast<size_t>(y) * img.cols + x) * channels];
      if (gray) {
        o[0] = p[1];  // a mask is gray: its three channels are equal
        continue;
      }
      double c[3] = {double(p[2]), double(p[1]), double(p[0])};
      if (top > 0) ochre_over(c, m.at<cv::Vec3b>(y, x)[1], top);
      for (int k = 0; k < 3; ++k) o[k] = static_cast<uint8_t>(std::clamp(std::lround(c[k]), 0L, 255L));
    }
  return px;
}

// Pictures for the page: from the files (previews, kPreviewSide px), else the
// 32x32 look-alike thumbnails in colour; of the groups' first members, of the
// first image/mask pairs (the image with its mask drawn over it, then the mask)
// and of the flagged images, within `budget` bytes of data URIs.
Thumbnails group_thumbnails(const AuditResult& r, size_t budget) {
  Thumbnails out;
  size_t used = 0;
  // A record's preview from its file (empty when it cannot be read now); a
  // mask's is kept, since its pair shows it twice (over its image, then alone).
  std::map<size_t, cv::Mat> mask_previews;
  auto preview_of = [&](size_t record) -> cv::Mat {
    if (r.settings.root.empty()) return {};
    auto kept = mask_previews.find(record);
    if (kept != mask_previews.end()) return kept->second;
    cv::Mat p = preview_image(r.settings.root / r.records[record].path, kPreviewSide, r.settings.read.max_bytes,
                              r.settings.read.decode);
    if (r.records[record].kind == FileKind::mask) mask_previews.emplace(record, p);
    return p;
  };
  auto uri_of = [&](size_t record, std::optional<size_t> mask = std::nullopt) {
    const cv::Mat img = preview_of(record), over = mask ? preview_of(*mask) : cv::Mat();
    if (!img.empty() && (!mask || !over.empty())) {
      const bool gray = r.records[record].kind == FileKind::mask;
      const std::vector<uint8_t> px = preview_pixels(img, gray, over);
      const std::vector<uint8_t> jpg = encode_jpeg(px.data(), img.cols, img.rows, gray ? 1 : 3, 80);
      if (!jpg.empty()) return "data:image/jpeg;base64," + base64(jpg);
    }
    if (!r.thumbs.has(record) || (mask && !r.thumbs.has(*mask))) return std::string();
    Thumbnail t, m;
    r.thumbs.get(record, t);
    if (mask) r.thumbs.get(*mask, m);
    const bool gray = r.records[record].kind == FileKind::mask;  // a mask is shown as it is
    std::vector<uint8_t> jpg = gray ? encode_jpeg(t.data(), kThumbSide, kThumbSide, 1, 85)
                                    : encode_jpeg(colour_thumbnail(t, mask ? &m : nullptr).data(), kThumbSide, kThumbSide, 3, 85);
    if (jpg.empty()) return std::string();
    return "data:image/jpeg;base64," + base64(jpg);
  };
  // A few image/mask pairs first (key "#masks": image, mask, image, mask, ...).
  size_t pairs = 0;
  for (size_t i = 0; i < r.records.size() && pairs < kMaskPairsShown; ++i) {
    if (r.masks.mask_of[i] < 0) continue;
    const FileRecord& img = r.records[i];
    const FileRecord& mask = r.records[static_cast<size_t>(r.masks.mask_of[i])];
    const size_t m = static_cast<size_t>(r.masks.mask_of[i]);
    std::string a = uri_of(i, m), b = uri_of(m);
    if (a.empty() || b.empty() || used + a.size() + b.size() > budget) break;
    used += a.size() + b.size();
    out["#masks"].emplace_back(img.path, std::move(a));
    out["#masks"].emplace_back(mask.path, std::move(b));
    ++pairs;
  }
  // The first pictures of each exposure, information and focus finding (key
  // "#flag:CODE"): the thumbnails the index keeps for them (pipeline/audit.h).
  for (const Finding& f : r.findings) {
    if (std::find_if(std::begin(kFloorCodes), std::end(kFloorCodes), [&](const char* c) { return f.code == c; }) ==
        std::end(kFloorCodes))
      continue;
    auto& strip = out["#flag:" + f.code];
    for (const std::string& path : f.paths) {
      if (strip.size() == kFlaggedShown) break;
      const auto it = std::lower_bound(r.records.begin(), r.records.end(), path,
                                       [](const FileRecord& rec, const std::string& p) { return rec.path < p; });
      if (it == r.records.end() || it->path != path) continue;
      std::string uri = uri_of(static_cast<size_t>(it - r.records.begin()));
      if (uri.empty()) continue;
      if (used + uri.size() > budget) return out;
      used += uri.size();
      strip.emplace_back(path, std::move(uri));
    }
  }
  for (size_t gi = 0; gi < r.groups.groups.size() && gi < 60; ++gi) {
    const Group& g = r.groups.groups[gi];
    auto& strip = out[group_id(static_cast<int64_t>(gi))];
    for (size_t k = 0; k < g.members.size() && k < 8; ++k) {
      const FileRecord& rec = r.records[g.members[k]];
      if (!rec.features.has_lookalike) continue;
      std::string uri = uri_of(g.members[k]);
      if (uri.empty()) continue;
      if (used + uri.size() > budget) return out;
      used += uri.size();
      strip.emplace_back(rec.path, std::move(uri));
    }
  }
  return out;
}

}  // namespace

void refuse_inside_root(const std::filesystem::path& root, const std::filesystem::path& target, const std::string& what) {
  if (!root.empty() && path_is_inside(root, target))
    throw InsideRootError(what + " " + target.string() + " lies inside ROOT " + root.string() +
                          "; tamis never writes inside the data set");
}

void write_outputs(const std::filesystem::path& out_dir, const AuditResult& result, size_t thumbnail_budget,
                   std::vector<StageTime>* times, const std::filesystem::path& junit_file) {
  refuse_inside_root(result.settings.root, out_dir, "--out");
  if (!junit_file.empty()) refuse_inside_root(result.settings.root, junit_file, "--junit");
  StageClock clock(times);
  std::error_code ec;
  std::filesystem::create_directories(out_dir, ec);
  if (ec) throw std::runtime_error("cannot create output folder " + out_dir.string() + ": " + ec.message());
  // What a killed run left behind (its temporaries; the outputs it had not yet
  // renamed) goes first.
  remove_stale_temporaries(out_dir, {"manifest.csv", "report.json", "report.html", kIndexFileName, kSetFileName});
  if (!junit_file.empty())
    remove_stale_temporaries(junit_file.parent_path().empty() ? "." : junit_file.parent_path(),
                             {junit_file.filename().string()});
  // Two at a time: the reports on a second thread, the manifest and the index on
  // this one. Each only reads the result. All four are put in place together
  // once all are written (a failure leaves the previous outputs as they were).
  StagedFiles staged;
  std::vector<StageTime> report_times, table_times;
  std::exception_ptr report_error;
  std::thread reports([&] {
    try {
      StageClock c(&report_times);
      // The findings' path lists go from the findings straight into the file.
      nlohmann::json report = build_report_without_paths(result);
      staged.write(out_dir / "report.json", [&](std::ostream& os) {
        std::string text;
        write_report_json(text, report, result.findings);
        os << text;
      });
      c.lap("report.json");
      Thumbnails thumbs = group_thumbnails(result, thumbnail_budget);
      staged.write(out_dir / "report.html",
                   [&](std::ostream& os) { os << render_html(report, thumbs, &result.findings); });
      c.lap("report.html");
    } catch (...) {
      report_error = std::current_exception();
    }
  });
  std::exception_ptr table_error;
  try {
    StageClock c(&table_times);
    staged.write(out_dir / "manifest.csv", [&](std::ostream& os) { write_manifest(os, result); });
    c.lap("manifest.csv");
    save_index(out_dir / kIndexFileName, result, &staged,
               result.class_mapping.applied ? &result.class_mapping.as_read : nullptr);
    c.lap("index.cbor");
    if (!junit_file.empty()) {  // staged with the others: all land together or none
      staged.write(junit_file, [&](std::ostream& os) { write_junit(os, result); });
      c.lap("junit");
    }
  } catch (...) {
    table_error = std::current_exception();
  }
  reports.join();
  if (table_error) std::rethrow_exception(table_error);
  if (report_error) std::rethrow_exception(report_error);
  staged.commit(out_dir / kSetFileName);
  clock.lap("outputs");
  if (times) {  // each file's own time, overlapping the other thread's
    for (const auto* part : {&table_times, &report_times})
      for (auto t : *part) {
        t.overlapped = true;
        times->push_back(std::move(t));
      }
  }
}

void write_part_file(const std::filesystem::path& file, const ScanPart& part) {
  refuse_inside_root(part.root, file, "--out");
  if (file.has_parent_path()) std::filesystem::create_directories(file.parent_path());
  write_file_atomically(file, [&](std::ostream& os) { write_part(os, part); });
}

void write_join_file(const std::filesystem::path& file, const JoinSlice& slice, const std::filesystem::path& root) {
  refuse_inside_root(root, file, "--out");
  if (file.has_parent_path()) std::filesystem::create_directories(file.parent_path());
  write_file_atomically(file, [&](std::ostream& os) { write_join(os, slice); });
}

}  // namespace tamis
