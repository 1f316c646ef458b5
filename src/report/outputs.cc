#include "tamis/report/outputs.h"

#include <turbojpeg.h>

#include <exception>
#include <stdexcept>
#include <thread>
#include <vector>

#include "tamis/base/atomic_file.h"
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

// A gray image as baseline JPEG (libjpeg-turbo); empty on failure.
std::vector<uint8_t> gray_jpeg(const uint8_t* pixels, int width, int height, int quality) {
  std::vector<uint8_t> out;
  tjhandle tj = tjInitCompress();
  if (!tj) return out;
  unsigned char* buf = nullptr;
  unsigned long size = 0;
  if (tjCompress2(tj, pixels, width, width, height, TJPF_GRAY, &buf, &size, TJSAMP_GRAY, quality, 0) == 0)
    out.assign(buf, buf + size);
  tjFree(buf);
  tjDestroy(tj);
  return out;
}

// JPEG thumbnails (the 32x32 look-alike thumbnails, shown at 64 px) of the groups'
// first members, within `budget` bytes of data URIs.
Thumbnails group_thumbnails(const AuditResult& r, size_t budget) {
  Thumbnails out;
  size_t used = 0;
  auto uri_of = [&](size_t record) {
    if (!r.thumbs.has(record)) return std::string();
    Thumbnail t;
    r.thumbs.get(record, t);
    std::vector<uint8_t> jpg = gray_jpeg(t.data(), 32, 32, 85);
    if (jpg.empty()) return std::string();
    return "data:image/jpeg;base64," + base64(jpg);
  };
  // A few image/mask pairs first (key "#masks": image, mask, image, mask, ...).
  size_t pairs = 0;
  for (size_t i = 0; i < r.records.size() && pairs < kMaskPairsShown; ++i) {
    if (r.masks.mask_of[i] < 0) continue;
    const FileRecord& img = r.records[i];
    const FileRecord& mask = r.records[static_cast<size_t>(r.masks.mask_of[i])];
    std::string a = uri_of(i), b = uri_of(static_cast<size_t>(r.masks.mask_of[i]));
    if (a.empty() || b.empty() || used + a.size() + b.size() > budget) break;
    used += a.size() + b.size();
    out["#masks"].emplace_back(img.path, std::move(a));
    out["#masks"].emplace_back(mask.path, std::move(b));
    ++pairs;
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
