#include "support/planted.h"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "tamis/base/random.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/features.h"
#include "tamis/read/probe.h"
#include "tamis/relate/screen_join.h"
#include "tamis/relate/lookalike_index.h"
#include "tamis/relate/match.h"
#include "support/photos.h"

namespace tamis::test {

namespace {

cv::Mat resized(const cv::Mat& m, double f, int interp) {
  cv::Mat o;
  cv::resize(m, o, cv::Size(std::max(1, int(std::lround(m.cols * f))), std::max(1, int(std::lround(m.rows * f)))), 0, 0,
             interp);
  return o;
}

// sigma given for a 28-pixel picture, scaled to this picture's shorter side.
double scaled_sigma(const cv::Mat& m, double sigma28) { return sigma28 * std::min(m.cols, m.rows) / 28.0; }

cv::Mat tone(const cv::Mat& m, const std::function<double(double)>& f) {
  cv::Mat lut(1, 256, CV_8U);
  for (int v = 0; v < 256; ++v) lut.at<uint8_t>(v) = cv::saturate_cast<uint8_t>(f(v));
  cv::Mat o;
  cv::LUT(m, lut, o);
  return o;
}

cv::Mat hsv_change(const cv::Mat& m, int hue_deg, double sat) {
  if (m.channels() != 3) return m.clone();
  cv::Mat hsv, o;
  cv::cvtColor(m, hsv, cv::COLOR_BGR2HSV);
  for (int y = 0; y < hsv.rows; ++y)
    for (int x = 0; x < hsv.cols; ++x) {
      auto& p = hsv.at<cv::Vec3b>(y, x);
      p[0] = static_cast<uint8_t>(((p[0] + hue_deg / 2) % 180 + 180) % 180);
      p[1] = cv::saturate_cast<uint8_t>(p[1] * sat);
    }
  cv::cvtColor(hsv, o, cv::COLOR_HSV2BGR);
  return o;
}

cv::Mat gains(const cv::Mat& m, double b, double g, double r) {
  if (m.channels() != 3) return m.clone();
  cv::Mat o;
  cv::multiply(m, cv::Scalar(b, g, r), o);
  return o;
}

}  // namespace

const std::vector<PlantedKind>& planted_kinds() {
  using M = const cv::Mat&;
  static const std::vector<PlantedKind> k = [] {
    std::vector<PlantedKind> v;
    const std::pair<const char*, int> interps[] = {{"nearest", cv::INTER_NEAREST}, {"linear", cv::INTER_LINEAR},
                                                   {"cubic", cv::INTER_CUBIC}, {"area", cv::INTER_AREA},
                                                   {"lanczos", cv::INTER_LANCZOS4}};
    for (const auto& entry : interps) {
      const char* name = entry.first;
      const int interp = entry.second;  // a variable, not a binding: lambdas capture it (clang 14)
      v.push_back({std::string("half-") + name, [interp](M m) { return resized(m, 0.5, interp); }, 0});
      if (interp != cv::INTER_AREA)
        v.push_back({std::string("double-") + name, [interp](M m) { return resized(m, 2.0, interp); }, 0});
    }
    v.push_back({"three-quarter-linear-q85", [](M m) { return resized(m, 0.75, cv::INTER_LINEAR); }, 85});
    v.push_back({"mirror", [](M m) { cv::Mat o; cv::flip(m, o, 1); return o; }, 0});
    v.push_back({"upside-down", [](M m) { cv::Mat o; cv::flip(m, o, 0); return o; }, 0});
    v.push_back({"turn-90", [](M m) { cv::Mat o; cv::rotate(m, o, cv::ROTATE_90_CLOCKWISE); return o; }, 0});
    v.push_back({"turn-180", [](M m) { cv::Mat o; cv::rotate(m, o, cv::ROTATE_180); return o; }, 0});
    v.push_back({"turn-270-q80", [](M m) { cv::Mat o; cv::rotate(m, o, cv::ROTATE_90_COUNTERCLOCKWISE); return o; }, 80});
    v.push_back({"transpose", [](M m) { cv::Mat o; cv::transpose(m, o); return o; }, 0});
    for (int q : {30, 50, 75, 95}) v.push_back({"jpeg-q" + std::to_string(q), [](M m) { return m.clone(); }, q});
    v.push_back({"png", [](M m) { return m.clone(); }, 0});
    v.push_back({"brighter-30", [](M m) { return tone(m, [](double x) { return x + 30; }); }, 0});
    v.push_back({"darker-30", [](M m) { return tone(m, [](double x) { return x - 30; }); }, 0});
    v.push_back({"contrast-0.7", [](M m) { return tone(m, [](double x) { return 128 + 0.7 * (x - 128); }); }, 0});
    v.push_back({"contrast-1.3", [](M m) { return tone(m, [](double x) { return 128 + 1.3 * (x - 128); }); }, 0});
    v.push_back({"gamma-0.7", [](M m) { return tone(m, [](double x) { return 255 * std::pow(x / 255, 0.7); }); }, 0});
    v.push_back({"gamma-1.4", [](M m) { return tone(m, [](double x) { return 255 * std::pow(x / 255, 1.4); }); }, 0});
    v.push_back({"gray", [](M m) {
                   cv::Mat o;
                   if (m.channels() == 3) cv::cvtColor(m, o, cv::COLOR_BGR2GRAY); else o = m.clone();
                   return o;
                 }, 0, true});
    for (int h : {15, -30, 60}) v.push_back({"hue" + std::to_string(h), [h](M m) { return hsv_change(m, h, 1.0); }, 0, true});
    v.push_back({"hue-30-q75", [](M m) { return hsv_change(m, -30, 1.0); }, 75, true});
    v.push_back({"saturation-0.5", [](M m) { return hsv_change(m, 0, 0.5); }, 0, true});
    v.push_back({"saturation-1.4", [](M m) { return hsv_change(m, 0, 1.4); }, 0, true});
    v.push_back({"warmer", [](M m) { return gains(m, 0.85, 1.0, 1.15); }, 0, true});
    v.push_back({"cooler", [](M m) { return gains(m, 1.15, 1.0, 0.88); }, 0, true});
    for (double s : {0.4, 0.7, 1.0})
      v.push_back({"blur-" + std::to_string(s).substr(0, 3), [s](M m) {
                     cv::Mat o;
                     cv::GaussianBlur(m, o, cv::Size(0, 0), scaled_sigma(m, s));
                     return o;
                   }, 0});
    v.push_back({"sharpen", [](M m) {
                   cv::Mat b, o;
                   cv::GaussianBlur(m, b, cv::Size(0, 0), scaled_sigma(m, 1.0));
                   cv::addWeighted(m, 1.6, b, -0.6, 0, o);
                   return o;
                 }, 0});
    for (int n : {3, 6})
      v.push_back({"noise-" + std::to_string(n), [n](M m) {
                     cv::Mat noise(m.size(), CV_16SC(m.channels())), o;
                     cv::RNG rng(static_cast<uint64_t>(m.cols * 131 + m.rows * 7 + n));
                     rng.fill(noise, cv::RNG::NORMAL, 0, n);
                     cv::Mat wide;
                     m.convertTo(wide, CV_16S);
                     wide += noise;
                     wide.convertTo(o, m.type());
                     return o;
                   }, 0});
    return v;
  }();
  return k;
}

std::vector<cv::Mat> photograph_tiles() {
  struct Source { std::string path; int grid; };
  // python3-sklearn's two sample photographs (a Chinese temple, a flower), libjxl-testdata's
  // flower close-up, room interior and three portraits from its wesaturate set, and
  // visp-images-data's Klimt painting and colour Solvay 1927 photograph.
  const std::string jxl = "/usr/share/libjxl-testdata/";
  const std::vector<Source> sources{
      {"/usr/lib/python3/dist-packages/sklearn/datasets/images/china.jpg", 2},
      {"/usr/lib/python3/dist-packages/sklearn/datasets/images/flower.jpg", 2},
      {jxl + "jxl/flower/flower.png", 3},
      {jxl + "jxl/hdr_room.png", 2},
      {jxl + "external/wesaturate/500px/tmshre_riaphotographs_srgb8.png", 2},
      {jxl + "external/wesaturate/500px/cvo9xd_keong_macan_srgb8.png", 2},
      {jxl + "external/wesaturate/500px/u76c0g_bliznaca_srgb8.png", 2},
      {(kVispDir / "Klimt/Klimt.ppm").string(), 2},
      {(kVispDir / "Solvay/Solvay_conference_1927_Version2_2126x1463.png").string(), 2},
  };
  std::vector<cv::Mat> tiles;
  for (const auto& s : sources) {
    const cv::Mat photo = cv::imread(s.path, cv::IMREAD_COLOR);
    if (photo.empty()) continue;
    const int w = photo.cols / s.grid, h = photo.rows / s.grid;
    for (int gy = 0; gy < s.grid; ++gy)
      for (int gx = 0; gx < s.grid; ++gx) {
        cv::Mat tile = photo(cv::Rect(gx * w, gy * h, w, h));
        const double f = std::min(1.0, 384.0 / std::max(w, h));
        cv::Mat out;
        if (f < 1.0) cv::resize(tile, out, cv::Size(), f, f, cv::INTER_AREA); else out = tile.clone();
        tiles.push_back(out);
      }
  }
  return tiles;
}

Lookalike lookalike_of_bytes(const std::vector<uint8_t>& bytes) {
  const ProbeOutcome p = probe_bytes(bytes);
  const Decoded d = decode_image(bytes, p.info, DecodeLimits{});
  if (p.defect != Defect::none || d.defect != Defect::none) throw std::runtime_error("the planted file does not decode");
  return lookalike_features(d.reduced);
}

PictureSize picture_of_bytes(const std::vector<uint8_t>& bytes) { return picture_size(probe_bytes(bytes).info); }

bool pair_joined(const Lookalike& a, const Lookalike& b, const GroupSettings& gs, PictureSize size_a, PictureSize size_b) {
  // The candidate keys as find_groups has them: the hash, the gray screen key
  // and the value plane's key (screen_join.h, match.h).
  const int64_t thr2 = screen_threshold(gs.screen_radius);
  const MatchProfile pa = match_profile(a.thumb), pb = match_profile(b.thumb);
  const MatchProfile va = value_profile(a.thumb), vb = value_profile(b.thumb);
  auto near = [&](int64_t d2) { return thr2 > 0 && d2 >= 0 && d2 <= thr2; };
  for (int t = 0; t < kDihedralCount; ++t) {
    const bool ab = hamming(a.phash[t], b.phash[0]) <= gs.radius || near(screen_distance2(pa, t, pb)) || near(screen_distance2(va, t, vb));
    if (ab && match_thumbnails(a.thumb, t, b.thumb, pair_settings(gs.match, size_a, size_b, t)).joined) return true;
    const bool ba = hamming(b.phash[t], a.phash[0]) <= gs.radius || near(screen_distance2(pb, t, pa)) || near(screen_distance2(vb, t, va));
    if (ba && match_thumbnails(b.thumb, t, a.thumb, pair_settings(gs.match, size_b, size_a, t)).joined) return true;
  }
  return false;
}

bool pair_joined(const Lookalike& a, cv::Size size_a, const Lookalike& b, cv::Size size_b, const GroupSettings& gs) {
  auto size = [](cv::Size s) { return picture_size(static_cast<uint32_t>(s.width), static_cast<uint32_t>(s.height)); };
  return pair_joined(a, b, gs, size(size_a), size(size_b));
}

cv::Mat hue_turned(const cv::Mat& m, int degrees) { return hsv_change(m, degrees, 1.0); }

std::vector<Scene> rendered_scenes(int count, int per_scene, int w, int h, uint64_t seed) {
  SplitMix64 rng(seed);
  auto uniform = [&](double lo, double hi) { return lo + (hi - lo) * double(rng.next() >> 11) / double(1ull << 53); };
  // A colour of luma y (BT.601) and the given chroma angle and strength, as BGR.
  auto colour = [](double y, double angle, double strength) {
    const double cb = strength * std::cos(angle), cr = strength * std::sin(angle);
    const double r = y + 1.402 * cr, g = y - 0.344136 * cb - 0.714136 * cr, b = y + 1.772 * cb;
    return cv::Scalar(std::clamp(b, 0.0, 255.0), std::clamp(g, 0.0, 255.0), std::clamp(r, 0.0, 255.0));
  };
  std::vector<Scene> out;
  for (int s = 0; s < count; ++s) {
    // The backdrop: a smooth gradient between two colours of nearby luma.
    const double y0 = uniform(90, 170), dy = uniform(-40, 40);
    // Draws sequenced (argument order is unspecified; this is the order the
    // measured figures in docs/lookalikes.md were made with): strength, then angle.
    const double s0 = uniform(5, 35), a0 = uniform(0, 6.283);
    const cv::Scalar c0 = colour(y0, a0, s0);
    const double s1 = uniform(5, 35), a1 = uniform(0, 6.283);
    const cv::Scalar c1 = colour(y0 + dy, a1, s1);
    const double dir = uniform(0, 6.283);
    cv::Mat backdrop(h, w, CV_8UC3);
    for (int yy = 0; yy < h; ++yy)
      for (int xx = 0; xx < w; ++xx) {
        const double t = std::clamp(0.5 + ((xx - w / 2.0) * std::cos(dir) + (yy - h / 2.0) * std::sin(dir)) / (w + h) * 1.6, 0.0, 1.0);
        for (int c = 0; c < 3; ++c) backdrop.at<cv::Vec3b>(yy, xx)[c] = cv::saturate_cast<uint8_t>(c0[c] * (1 - t) + c1[c] * t);
      }
    auto luma_at = [&](cv::Point p) {
      const cv::Vec3b v = backdrop.at<cv::Vec3b>(std::clamp(p.y, 0, h - 1), std::clamp(p.x, 0, w - 1));
      return 0.114 * v[0] + 0.587 * v[1] + 0.299 * v[2];
    };
    struct Obj { int shape; cv::Point at; int size; double angle; };
    auto draw = [&](cv::Mat& m, const Obj& o) {
      // Stands out in hue: the backdrop's luma there (a few levels off), strong chroma.
      const cv::Scalar col = colour(luma_at(o.at) + 6, o.angle, 55);
      if (o.shape == 0) cv::circle(m, o.at, o.size, col, cv::FILLED, cv::LINE_AA);
      else if (o.shape == 1) cv::rectangle(m, o.at - cv::Point(o.size, o.size * 2 / 3), o.at + cv::Point(o.size, o.size * 2 / 3), col, cv::FILLED, cv::LINE_AA);
      else {
        std::vector<cv::Point> tri{o.at + cv::Point(0, -o.size), o.at + cv::Point(o.size, o.size), o.at + cv::Point(-o.size, o.size)};
        cv::fillConvexPoly(m, tri, col, cv::LINE_AA);
      }
    };
    auto random_obj = [&](int size) {
      const int shape = int(rng.next() % 3);
      const int y = int(uniform(0.2, 0.8) * h);  // sequenced: y, then x (as the figures were made)
      const int x = int(uniform(0.2, 0.8) * w);
      const double angle = uniform(0, 6.283);
      return Obj{shape, cv::Point(x, y), size, angle};
    };
    const int big = std::min(w, h) / 5, small = std::max(3, std::min(w, h) / 12);
    const Obj base = random_obj(big);
    Obj moved = base;
    moved.at.x = base.at.x + (base.at.x < w / 2 ? 1 : -1) * w / 4;
    Obj recoloured = base;
    recoloured.angle += 2.1;
    const Obj tiny = random_obj(small);
    Obj tiny_moved = tiny;
    tiny_moved.at.y = tiny.at.y + (tiny.at.y < h / 2 ? 1 : -1) * h / 5;
    const Obj second = random_obj(big * 2 / 3);
    Obj second_recoloured = second;
    second_recoloured.angle += 2.6;
    const std::vector<std::pair<std::string, std::vector<Obj>>> plan = {
        {"base", {base}}, {"other object", {random_obj(big)}}, {"moved", {moved}}, {"recoloured", {recoloured}},
        {"small object", {tiny}}, {"small object moved", {tiny_moved}}, {"two objects", {base, second}},
        {"two objects, one recoloured", {base, second_recoloured}}, {"another object", {random_obj(big)}},
        {"another object", {random_obj(big)}}};
    Scene sc;
    for (int p = 0; p < per_scene; ++p) {
      const auto& [how, objs] = plan[static_cast<size_t>(p) % plan.size()];
      cv::Mat m = backdrop.clone();
      for (const auto& o : objs) draw(m, p < int(plan.size()) ? o : random_obj(big));
      sc.pictures.push_back(m);
      sc.how.push_back(p < int(plan.size()) ? how : "another object");
    }
    out.push_back(std::move(sc));
  }
  return out;
}

}  // namespace tamis::test
