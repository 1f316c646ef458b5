// Mask pairing on generated layouts whose truth the test constructs: photographs
// (shapes drawn with OpenCV on textured backgrounds) and their masks (0/255, or a
// small label palette), in every layout the pairing knows, plus the negative cases.
#include <catch2/catch.hpp>

#include <filesystem>
#include <map>
#include <set>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/temp_tree.h"
#include "tamis/base/random.h"
#include "tamis/pipeline/audit.h"

using namespace tamis;
namespace fs = std::filesystem;

namespace {

struct Scene {
  cv::Mat photo;  // BGR, textured
  cv::Mat mask;   // 8-bit gray: 0 background, 255 (or a label value) for each shape
};

Scene scene(uint64_t seed, int w = 96, int h = 72, bool label_palette = false) {
  SplitMix64 rng(seed);
  Scene s;
  s.photo = cv::Mat(h, w, CV_8UC3);
  for (auto it = s.photo.begin<cv::Vec3b>(); it != s.photo.end<cv::Vec3b>(); ++it) {
    // Draws sequenced (argument order is unspecified), last channel first.
    const auto c2 = uint8_t(60 + rng.below(120));
    const auto c1 = uint8_t(60 + rng.below(120));
    const auto c0 = uint8_t(60 + rng.below(120));
    *it = cv::Vec3b(c0, c1, c2);
  }
  cv::GaussianBlur(s.photo, s.photo, cv::Size(5, 5), 1.2);
  s.mask = cv::Mat::zeros(h, w, CV_8UC1);
  for (int k = 0; k < 2; ++k) {
    const int cy = int(10 + rng.below(uint64_t(h - 20)));  // sequenced: y drawn first
    const int cx = int(10 + rng.below(uint64_t(w - 20)));
    cv::Point c(cx, cy);
    int r = int(6 + rng.below(12));
    const double c2 = double(rng.below(256)), c1 = double(rng.below(256)), c0 = double(rng.below(256));
    cv::Scalar colour(c0, c1, c2);
    cv::circle(s.photo, c, r, colour, cv::FILLED, cv::LINE_AA);
    cv::circle(s.mask, c, r, cv::Scalar(label_palette ? 1 + k : 255), cv::FILLED, cv::LINE_8);
  }
  return s;
}

void save(const fs::path& p, const cv::Mat& m, const char* ext = ".png") {
  std::vector<uchar> b;
  REQUIRE(cv::imencode(ext, m, b));
  test::write_bytes(p, std::vector<uint8_t>(b.begin(), b.end()));
}

AuditResult audit(const fs::path& root, MaskSettings ms = {}) {
  AuditSettings s;
  s.root = root;
  s.masks = std::move(ms);
  return run_audit(s);
}

std::map<std::string, std::string> mask_links(const AuditResult& r) {
  std::map<std::string, std::string> out;
  for (size_t i = 0; i < r.records.size(); ++i)
    if (r.masks.mask_of[i] >= 0) out[r.records[i].path] = r.records[static_cast<size_t>(r.masks.mask_of[i])].path;
  return out;
}

std::set<std::string> codes(const AuditResult& r) {
  std::set<std::string> c;
  for (const auto& f : r.findings) c.insert(f.code);
  return c;
}

}  // namespace

TEST_CASE("class folders holding a photo folder and a sibling mask folder ('images' / 'images GT')", "[masks]") {
  test::TempDir t;
  int k = 0;
  for (const char* cls : {"bark", "leaf"})
    for (int i = 0; i < 6; ++i, ++k) {
      Scene s = scene(k);
      char name[16];
      std::snprintf(name, sizeof name, "%05d", i);  // the same numbered names in every class
      save(t / cls / "images" / (std::string(name) + ".png"), s.photo);
      save(t / cls / "images GT" / (std::string(name) + ".png"), s.mask);
    }
  AuditResult r = audit(t.path());
  CHECK(r.totals.images == 12);
  CHECK(r.totals.masks == 12);
  CHECK(r.labels.names == std::vector<std::string>{"bark", "leaf"});
  auto links = mask_links(r);
  REQUIRE(links.size() == 12);
  CHECK(links.at("bark/images/00003.png") == "bark/images GT/00003.png");
  CHECK(links.at("leaf/images/00000.png") == "leaf/images GT/00000.png");
  CHECK(codes(r).count("mask-orphan") == 0);
  // the evidence is recorded
  bool found = false;
  for (const auto& e : r.masks.evidence)
    if (e.folder == "leaf/images GT") {
      found = true;
      CHECK(e.accepted);
      CHECK(e.pairs == 6);
      CHECK(e.confirmed == 6);
    }
  CHECK(found);
}

TEST_CASE("parallel images/ and masks/ trees with label-palette masks", "[masks]") {
  test::TempDir t;
  int k = 100;
  for (const char* cls : {"gravel", "sand"})
    for (int i = 0; i < 5; ++i, ++k) {
      Scene s = scene(k, 96, 72, true);
      std::string n = std::to_string(i);
      save(t / "images" / cls / (n + ".jpg"), s.photo, ".jpg");
      save(t / "masks" / cls / (n + ".png"), s.mask);
    }
  AuditResult r = audit(t.path());
  CHECK(r.totals.images == 10);
  CHECK(r.totals.masks == 10);
  CHECK(r.labels.names == std::vector<std::string>{"gravel", "sand"});  // not "images"
  CHECK(mask_links(r).at("images/sand/4.jpg") == "masks/sand/4.png");
}

TEST_CASE("stem suffixes in one folder: 0001.png and 0001_mask.png", "[masks]") {
  test::TempDir t;
  for (int i = 0; i < 6; ++i) {
    Scene s = scene(200 + i);
    save(t / "moss" / ("000" + std::to_string(i) + ".png"), s.photo);
    save(t / "moss" / ("000" + std::to_string(i) + "_mask.png"), s.mask);
  }
  AuditResult r = audit(t.path());
  CHECK(r.totals.images == 6);
  CHECK(r.totals.masks == 6);
  CHECK(mask_links(r).at("moss/0002.png") == "moss/0002_mask.png");
}

TEST_CASE("no masks where there are none: look-alike names, line drawings, gray photos", "[masks][negative]") {
  test::TempDir t;
  for (int i = 0; i < 6; ++i) {
    std::string n = std::to_string(i) + ".png";
    save(t / "oak" / n, scene(300 + i).photo);        // two real classes whose names differ by a token,
    save(t / "oak_young" / n, scene(400 + i).photo);  // with the same file names
    cv::Mat drawing(72, 96, CV_8UC1, cv::Scalar(255));  // few distinct values, but no partner
    cv::line(drawing, {0, i * 10}, {95, 71 - i * 5}, cv::Scalar(0), 2);
    save(t / "drawings" / n, drawing);
    cv::Mat gray;
    cv::cvtColor(scene(500 + i).photo, gray, cv::COLOR_BGR2GRAY);
    save(t / "stones" / n, gray);  // gray photographs beside colour ones
    save(t / "stones_colour" / n, scene(600 + i).photo);
  }
  AuditResult r = audit(t.path());
  CHECK(r.totals.masks == 0);
  CHECK(r.totals.images == 30);
  CHECK(r.labels.names.size() == 5);
  for (const auto& e : r.masks.evidence) {
    INFO(e.folder);
    CHECK_FALSE(e.accepted);
  }
}

TEST_CASE("a mask of the wrong size, an orphan, an empty mask, a misfiled photo", "[masks][findings]") {
  test::TempDir t;
  for (int i = 0; i < 8; ++i) {
    Scene s = scene(700 + i);
    std::string n = std::to_string(i) + ".png";
    save(t / "tile" / "img" / n, s.photo);
    if (i == 1) {
      cv::Mat big;
      cv::resize(s.mask, big, cv::Size(), 2.0, 2.0, cv::INTER_NEAREST);
      save(t / "tile" / "img_mask" / n, big);
    } else if (i == 2) {
      save(t / "tile" / "img_mask" / n, cv::Mat::zeros(s.mask.size(), CV_8UC1));
    } else if (i == 3) {
      save(t / "tile" / "img_mask" / n, scene(900).photo);  // a photograph filed among the masks
    } else if (i != 4) {
      save(t / "tile" / "img_mask" / n, s.mask);
    }
  }
  save(t / "tile" / "img_mask" / "99.png", scene(999).mask);  // a mask with no image
  AuditResult r = audit(t.path());
  std::map<std::string, std::vector<std::string>> by;
  for (const auto& f : r.findings) by[f.code] = f.paths;
  CHECK(by["mask-size-mismatch"] == std::vector<std::string>{"tile/img/1.png", "tile/img_mask/1.png"});
  CHECK(by["mask-empty"] == std::vector<std::string>{"tile/img_mask/2.png"});
  CHECK(by["mask-misfiled"] == std::vector<std::string>{"tile/img_mask/3.png"});
  // orphans: image 4 (no mask), image 3 (its "mask" was a photograph), mask 99 (no image)
  CHECK(by["mask-orphan"] == std::vector<std::string>{"tile/img/3.png", "tile/img/4.png", "tile/img_mask/99.png"});
  CHECK(policy_exit_status(r) == 1);  // the size mismatch is an error
}

TEST_CASE("settings force or forbid a folder's role", "[masks][settings]") {
  test::TempDir t;
  for (int i = 0; i < 5; ++i) {
    Scene s = scene(800 + i);
    std::string n = std::to_string(i) + ".png";
    save(t / "cls" / "photos" / n, s.photo);
    save(t / "cls" / "photos_mask" / n, s.mask);
    save(t / "cls" / "photos_extra" / n, scene(850 + i).photo);  // photographs: no mask folder by pixels
  }
  CHECK(audit(t.path()).totals.masks == 5);
  MaskSettings forbid;
  forbid.forbid = {"cls/photos_mask"};
  CHECK(audit(t.path(), forbid).totals.masks == 0);
  MaskSettings force;
  force.force = {"cls/photos_extra"};
  CHECK(audit(t.path(), force).totals.masks == 10);
}
