// Look-alike truth on planted sets whose truth the test constructs
// (tests/support/planted.h): copies of Fashion-MNIST images (Debian
// dataset-fashion-mnist), the visp photographs (Debian visp-images-data) and
// rendered colour scenes must join their source; rendered pictures that share a
// smooth backdrop and differ by an object (moved, recoloured, another one) must
// not. The figures for every copy kind are in docs/lookalikes.md
// (bench/lookalike_truth); this test holds the kinds that are found today at
// recall >= 0.99 there, holds floors under the blurred copies that the blur
// matching brought from 0.05-0.07 to 0.92-0.98, and bounds the distinct pairs
// joined.
#include <catch2/catch.hpp>

#include <algorithm>
#include <array>
#include <cmath>
#include <filesystem>
#include <map>
#include <set>

#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "support/fashion_mnist.h"
#include "support/photos.h"
#include "support/planted.h"
#include "support/temp_tree.h"
#include "tamis/read/decode/decode.h"
#include "tamis/read/features.h"
#include "tamis/read/probe.h"
#include "tamis/relate/groups.h"
#include "tamis/relate/lookalike_index.h"
#include "tamis/relate/match.h"

using namespace tamis;

TEST_CASE("planted copies of every kind found today are joined to their source", "[lookalike][truth]") {
  std::vector<cv::Mat> sources;
  const auto fm = test::fashion_mnist_tree();
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(fm))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  for (size_t k = 0; k < files.size(); k += 700) sources.push_back(cv::imread(files[k].string(), cv::IMREAD_UNCHANGED));
  for (const auto& rel : test::distinct_photographs())
    sources.push_back(cv::imread((test::kVispDir / rel).string(), cv::IMREAD_UNCHANGED));
  for (const auto& sc : test::rendered_scenes(12, 1, 160, 120, 7)) sources.push_back(sc.pictures[0]);
  // Kinds at recall >= 0.99 in bench/lookalike_truth (docs/lookalikes.md).
  const std::set<std::string> held = {"mirror", "upside-down", "turn-90", "turn-180", "transpose", "png",
                                      "jpeg-q95", "double-nearest", "double-linear", "gray", "blur-0.4"};
  // Kinds below 0.99 whose recall the blur matching raised (bench at 0.995:
  // blur-0.7 0.977, blur-1.0 0.917; 0.071 and 0.045 by the plain correlation).
  const std::map<std::string, double> floors = {{"blur-0.7", 0.93}, {"blur-1.0", 0.85}};
  const GroupSettings gs;
  std::map<std::string, std::pair<int, int>> per_kind;
  for (const auto& k : test::planted_kinds()) {
    if (!held.count(k.name) && !floors.count(k.name)) continue;
    for (const auto& src : sources) {
      if (k.colour_only && src.channels() != 3) continue;
      const auto bytes_a = test::encode_copy(src, 0);
      const Lookalike a = test::lookalike_of_bytes(bytes_a);
      const cv::Mat copy = k.make(src);
      const auto bytes_b = test::encode_copy(copy, k.jpeg_quality);
      const Lookalike b = test::lookalike_of_bytes(bytes_b);
      auto& pk = per_kind[k.name];
      pk.first += test::pair_joined(a, b, gs, test::picture_of_bytes(bytes_a), test::picture_of_bytes(bytes_b));
      ++pk.second;
    }
  }
  REQUIRE(per_kind.size() == held.size() + floors.size());
  for (const auto& [name, ft] : per_kind) {
    INFO(name << ": " << ft.first << " of " << ft.second);
    CHECK(ft.second >= 12);
    CHECK(double(ft.first) / ft.second >= (floors.count(name) ? floors.at(name) : 0.99));
  }
}

TEST_CASE("tone and colour changes are joined through the tone-and-colour fit", "[lookalike][truth]") {
  // Fashion-MNIST images (Debian dataset-fashion-mnist) and tiles of colour
  // photographs (Debian python3-sklearn, libjxl-testdata, visp-images-data; see
  // planted.h). Floors under the recall measured by bench/lookalike_truth at the
  // defaults (docs/lookalikes.md): gamma 0.97-0.98, contrast 1.3 and darker 0.95
  // (Fashion-MNIST; 0.73-0.80 before the fit), white balance 0.98-1.00, hue 15
  // degrees 1.00, and since the 32x32 chroma, the fit's HSV regressor and the
  // value key (sixteenth session) hue -30 1.00, hue -30 re-encoded at JPEG 75
  // 0.93, hue 60 0.98, saturation 0.5 and 1.4 0.98 (photographs; before: 0.76,
  // 0.73, 0.46, 0.80, 0.93; before the fit 0.41-0.95).
  struct Source { cv::Mat pixels; bool photo; };
  std::vector<Source> sources;
  const auto fm = test::fashion_mnist_tree();
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(fm))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  for (size_t k = 0; k < files.size(); k += 350) sources.push_back({cv::imread(files[k].string(), cv::IMREAD_UNCHANGED), false});
  for (const auto& t : test::photograph_tiles()) sources.push_back({t, true});
  const std::map<std::string, double> floors = {
      {"gamma-0.7", 0.93},      {"gamma-1.4", 0.93},      {"contrast-1.3", 0.9}, {"darker-30", 0.9},
      {"hue15", 0.95},          {"hue-30", 0.95},         {"hue-30-q75", 0.9},   {"hue60", 0.95},
      {"saturation-0.5", 0.95}, {"saturation-1.4", 0.95}, {"warmer", 0.93},      {"cooler", 0.93}};
  const GroupSettings gs;
  GroupSettings no_fit = gs;
  no_fit.match.fit_floor = 1.0;
  std::map<std::string, std::array<int, 3>> per_kind;  // joined, joined without the fit, total
  for (const auto& k : test::planted_kinds()) {
    if (!floors.count(k.name)) continue;
    for (const auto& src : sources) {
      if (k.colour_only && src.pixels.channels() != 3) continue;
      const auto bytes_a = test::encode_copy(src.pixels, 0);
      const Lookalike a = test::lookalike_of_bytes(bytes_a);
      const cv::Mat copy = k.make(src.pixels);
      const auto bytes_b = test::encode_copy(copy, k.jpeg_quality);
      const Lookalike b = test::lookalike_of_bytes(bytes_b);
      auto& pk = per_kind[k.name];
      pk[0] += test::pair_joined(a, b, gs, test::picture_of_bytes(bytes_a), test::picture_of_bytes(bytes_b));
      pk[1] += test::pair_joined(a, b, no_fit, test::picture_of_bytes(bytes_a), test::picture_of_bytes(bytes_b));
      ++pk[2];
    }
  }
  REQUIRE(per_kind.size() == floors.size());
  int gained = 0;
  for (const auto& [name, c] : per_kind) {
    INFO(name << ": " << c[0] << " of " << c[2] << " (" << c[1] << " without the fit)");
    CHECK(c[2] >= 30);
    CHECK(double(c[0]) / c[2] >= floors.at(name));
    CHECK(c[0] >= c[1]);  // the fit only adds
    gained += c[0] - c[1];
  }
  CHECK(gained > 100);
}

TEST_CASE("tiles of one photograph are never joined", "[lookalike][truth]") {
  // Non-overlapping tiles of the same colour photographs (planted.h): distinct
  // pictures that share textures, colours and light. 820 pairs, none joined
  // (bench/lookalike_truth).
  const auto tiles = test::photograph_tiles();
  REQUIRE(tiles.size() >= 30);
  std::vector<Lookalike> looks;
  for (const auto& t : tiles) looks.push_back(test::lookalike_of_bytes(test::encode_copy(t, 90)));
  const GroupSettings gs;
  int joined = 0;
  for (size_t i = 0; i < looks.size(); ++i)
    for (size_t j = i + 1; j < looks.size(); ++j) joined += test::pair_joined(looks[i], looks[j], gs);
  CHECK(joined == 0);
}

TEST_CASE("distinct pictures stay apart when one of them is hue-turned as a whole", "[lookalike][truth]") {
  // The fit models a whole-picture HSV change and pairs that show one are fitted
  // from a lower floor (match.h, kColourFitFloor); that must not join distinct
  // pictures whose colours differ by a turn on top of their difference. Tiles of
  // one photograph (planted.h) and rendered scenes that differ in one object,
  // the second picture of each pair turned by 40 degrees on OpenCV's HSV circle:
  // none joined (bench/lookalike_truth: 0 of 2,700 scene pairs, 0 of 820 tile
  // pairs). Each tile's own turned copy is joined, so the test cannot pass by
  // joining nothing. (A scene's turned copy mostly is not: its gray picture has
  // almost no structure, and a turn makes a new one; docs/lookalikes.md.)
  const GroupSettings gs;
  int pairs = 0, joined = 0, copies = 0, copies_joined = 0;
  auto check = [&](const std::vector<cv::Mat>& pictures, bool own_copies) {
    std::vector<Lookalike> looks, turned;
    for (const auto& p : pictures) {
      looks.push_back(test::lookalike_of_bytes(test::encode_copy(p, 90)));
      turned.push_back(test::lookalike_of_bytes(test::encode_copy(test::hue_turned(p, 40), 90)));
    }
    for (size_t i = 0; i < looks.size(); ++i) {
      if (own_copies) {
        ++copies;
        copies_joined += test::pair_joined(looks[i], turned[i], gs);
      }
      for (size_t j = i + 1; j < looks.size(); ++j) {
        ++pairs;
        joined += test::pair_joined(looks[i], turned[j], gs);
      }
    }
  };
  check(test::photograph_tiles(), true);
  for (const auto& sc : test::rendered_scenes(20, 10, 160, 120, 99)) check(sc.pictures, false);
  INFO(joined << " of " << pairs << " distinct pairs joined; " << copies_joined << " of " << copies << " turned tiles joined");
  CHECK(pairs == 820 + 20 * 45);
  CHECK(joined == 0);
  CHECK(copies == 41);
  CHECK(copies_joined >= 37);  // measured 39 (turned by 40 degrees and re-encoded at JPEG 90; 38 without the value key)
}

TEST_CASE("pictures on a shared backdrop that differ in one object are rarely joined", "[lookalike][truth]") {
  // 40 scenes x 10 pictures: 1,800 pairs that must not be joined. The correlation
  // with the local and chroma-share checks off joins many (40); the bound below is
  // the measured count (7 here; bench/lookalike_truth: 9 of 2,700 on 60 scenes,
  // 58 before the hue-turn check) with a margin, so that a change that loosens the
  // checks fails here.
  const auto scenes = test::rendered_scenes(40, 10, 160, 120, 99);
  const GroupSettings gs;
  GroupSettings corr_only = gs;
  corr_only.match.max_local = 1e9;
  corr_only.match.max_chroma = 1e9;
  corr_only.match.max_chroma_local = 1e9;
  GroupSettings no_window = gs;  // the colour check without its local share
  no_window.match.max_chroma_local = 1e9;
  int pairs = 0, joined_now = 0, joined_by_correlation = 0, joined_without_window = 0;
  for (const auto& sc : scenes) {
    std::vector<Lookalike> looks;
    for (const auto& p : sc.pictures) looks.push_back(test::lookalike_of_bytes(test::encode_copy(p, 90)));
    for (size_t i = 0; i < looks.size(); ++i)
      for (size_t j = i + 1; j < looks.size(); ++j) {
        ++pairs;
        joined_now += test::pair_joined(looks[i], looks[j], gs);
        joined_by_correlation += test::pair_joined(looks[i], looks[j], corr_only);
        joined_without_window += test::pair_joined(looks[i], looks[j], no_window);
      }
  }
  INFO(joined_now << " joined of " << pairs << " (by correlation alone: " << joined_by_correlation
                  << "; without the colour check's local share: " << joined_without_window << ")");
  CHECK(pairs == 1800);
  CHECK(joined_by_correlation > 2 * joined_now);
  // Measured (2026-12-03): 5 joined, 7 without the local share, 40 by correlation alone.
  CHECK(joined_now <= 6);
  CHECK(joined_without_window > joined_now);  // the local share rejects an object added in one place
}

TEST_CASE("the colour check tells a recoloured object from a global colour change", "[lookalike][truth][match]") {
  // A strongly coloured gradient backdrop (the test constructs it) with a disc;
  // the disc recoloured at the same luminance vs the whole picture hue-rotated.
  cv::Mat base(96, 128, CV_8UC3);
  for (int y = 0; y < base.rows; ++y)
    for (int x = 0; x < base.cols; ++x) base.at<cv::Vec3b>(y, x) = cv::Vec3b(uint8_t(60 + x), uint8_t(150 - y / 2), uint8_t(200 - x));
  cv::Mat a = base.clone(), b = base.clone();
  cv::circle(a, {60, 45}, 20, cv::Scalar(40, 200, 120), cv::FILLED);   // BGR: green-ish
  cv::circle(b, {60, 45}, 20, cv::Scalar(200, 120, 135), cv::FILLED);  // purple-ish, about the same luma
  const Lookalike la = test::lookalike_of_bytes(test::encode_copy(a, 0)), lb = test::lookalike_of_bytes(test::encode_copy(b, 0));
  const MatchSettings ms;
  const Match recoloured = match_thumbnails(la.thumb, 0, lb.thumb, ms);
  INFO("recoloured: correlation " << recoloured.correlation << " local " << recoloured.local << " chroma " << recoloured.chroma);
  CHECK_FALSE(recoloured.joined);
  // Conversion to gray keeps the match (the colour check has nothing to explain).
  cv::Mat gray;
  cv::cvtColor(a, gray, cv::COLOR_BGR2GRAY);
  const Match to_gray = match_thumbnails(la.thumb, 0, test::lookalike_of_bytes(test::encode_copy(gray, 0)).thumb, ms);
  INFO("gray: correlation " << to_gray.correlation << " chroma " << to_gray.chroma);
  CHECK(to_gray.joined);
}

TEST_CASE("an object repainted on a weakly coloured backdrop is not a hue turn of the whole picture", "[lookalike][truth][match]") {
  // The test constructs both sides: a smooth backdrop whose colour is weak (chroma
  // 6-14 levels, BT.601) and a disc that stands out in hue only (the backdrop's
  // luma, chroma 55). Repainting the disc at the same luma, by 60-180 degrees of
  // chroma angle, must not join (the colour check alone joined such pairs: its
  // constant shift and luma term absorb a weak backdrop's mismatch); the
  // repainted picture's own JPEG copy must.
  auto colour = [](double y, double angle, double strength) {
    const double cb = strength * std::cos(angle), cr = strength * std::sin(angle);
    return cv::Scalar(std::clamp(y + 1.772 * cb, 0.0, 255.0), std::clamp(y - 0.344136 * cb - 0.714136 * cr, 0.0, 255.0),
                      std::clamp(y + 1.402 * cr, 0.0, 255.0));
  };
  const MatchSettings ms;
  int repainted_joined = 0, repainted = 0;
  for (int scene = 0; scene < 6; ++scene) {
    const double y0 = 100 + 12 * scene, back_angle = 1.1 * scene, strength = 6 + 1.6 * scene;
    cv::Mat base(120, 160, CV_8UC3);
    for (int y = 0; y < base.rows; ++y)
      for (int x = 0; x < base.cols; ++x) {
        const double t = (x + 0.5 * y) / 220.0;
        const cv::Scalar c = colour(y0 + 20 * t, back_angle + 1.5 * t, strength);
        base.at<cv::Vec3b>(y, x) = cv::Vec3b(cv::saturate_cast<uint8_t>(c[0]), cv::saturate_cast<uint8_t>(c[1]), cv::saturate_cast<uint8_t>(c[2]));
      }
    const cv::Point at(50 + 9 * scene, 45 + 5 * scene);
    const double disc_angle = 0.7 + 0.9 * scene;
    cv::Mat a = base.clone();
    cv::circle(a, at, 24, colour(y0 + 10, disc_angle, 55), cv::FILLED, cv::LINE_AA);
    const Lookalike la = test::lookalike_of_bytes(test::encode_copy(a, 0));
    for (int degrees : {60, 90, 120, 150, 180}) {
      cv::Mat b = base.clone();
      cv::circle(b, at, 24, colour(y0 + 10, disc_angle + degrees * 3.14159265358979 / 180.0, 55), cv::FILLED, cv::LINE_AA);
      const Match m = match_thumbnails(la.thumb, 0, test::lookalike_of_bytes(test::encode_copy(b, 0)).thumb, ms);
      INFO("scene " << scene << " repainted by " << degrees << ": correlation " << m.correlation << " chroma " << m.chroma);
      CHECK_FALSE(m.joined);
      ++repainted;
      repainted_joined += m.joined;
      const Match own = match_thumbnails(test::lookalike_of_bytes(test::encode_copy(b, 0)).thumb, 0,
                                         test::lookalike_of_bytes(test::encode_copy(b, 85)).thumb, ms);
      CHECK(own.joined);
    }
  }
  INFO(repainted_joined << " of " << repainted << " repainted joined");
  CHECK(repainted_joined == 0);
  // The whole picture's hue turned (OpenCV's HSV conversion, the reference for the
  // HSV circle): on the photograph tiles (planted.h), every copy that the gray and
  // chroma checks accept must pass the hue check too. (Hue-turned copies of the
  // scenes above change the disc's luma by tens of levels, so their gray pictures
  // do not match at all.)
  int reached = 0, turned_joined = 0;
  for (const auto& tile : test::photograph_tiles()) {
    const Lookalike lt = test::lookalike_of_bytes(test::encode_copy(tile, 0));
    for (int degrees : {-90, -60, -30, 30, 60, 90}) {
      const Match m = match_thumbnails(lt.thumb, 0, test::lookalike_of_bytes(test::encode_copy(test::hue_turned(tile, degrees), 0)).thumb, ms);
      if (m.correlation < ms.min_correlation || m.local > ms.max_local || m.chroma < 0 || m.chroma > ms.max_chroma ||
          m.chroma_local > ms.max_chroma_local)
        continue;
      INFO("hue turned by " << degrees << ": correlation " << m.correlation << " chroma " << m.chroma);
      CHECK(m.joined);
      ++reached;
      turned_joined += m.joined;
    }
  }
  INFO(turned_joined << " of " << reached << " hue-turned tiles that reach the hue check joined");
  CHECK(reached >= 60);
}

TEST_CASE("each group says how its members matched: identical, the flip/turn, the blur", "[lookalike][truth][groups]") {
  // A visp photograph (Debian visp-images-data), a byte copy, a mirrored copy and
  // a copy blurred by sigma 1 px per 28 px: the truth is how the test made them.
  const cv::Mat src = cv::imread((test::kVispDir / test::distinct_photographs().front()).string(), cv::IMREAD_COLOR);
  REQUIRE(!src.empty());
  cv::Mat mirrored, blurred;
  cv::flip(src, mirrored, 1);
  cv::GaussianBlur(src, blurred, cv::Size(0, 0), std::min(src.cols, src.rows) / 28.0);
  const std::vector<std::vector<uint8_t>> files = {test::encode_copy(src, 0), test::encode_copy(mirrored, 0),
                                                   test::encode_copy(blurred, 0), test::encode_copy(src, 0)};
  std::vector<FileRecord> records(files.size());
  ThumbnailTable thumbs;
  thumbs.assign_all(files.size());
  for (size_t i = 0; i < files.size(); ++i) {
    const Lookalike l = test::lookalike_of_bytes(files[i]);
    records[i].path = "c/" + std::to_string(i) + ".png";
    records[i].kind = FileKind::image;
    records[i].features.has_lookalike = records[i].features.has_content_hash = true;
    records[i].features.content_hash = {i == 3 ? 0 : i, 7};  // 3 is a byte copy of 0
    records[i].features.look = l;
    thumbs.at(i) = l.thumb;
  }
  const GroupResult g = find_groups(records, thumbs, GroupSettings{});
  REQUIRE(g.groups.size() == 1);
  const auto& links = g.groups[0].links;
  REQUIRE(links.size() == 3);
  CHECK((links[0].a == 0 && links[0].b == 3 && links[0].turn == -1));  // byte-identical first
  CHECK((links[1].a == 0 && links[1].b == 1));
  CHECK(std::string(turn_name(links[1].turn)) == "mirror");
  CHECK(links[1].blur_step == 0);
  CHECK((links[2].a == 0 && links[2].b == 2));
  CHECK(std::string(turn_name(links[2].turn)) == "none");
  CHECK(links[2].blur_step > 0);
  CHECK(links[2].blurred_a);  // the sharp source is blurred towards the copy
  CHECK(links[2].correlation >= GroupSettings{}.match.min_correlation);
}

TEST_CASE("a picture's allowance shrinks with its own pixels under small_side", "[lookalike][match][small]") {
  // Values worked by hand from the rule in match.h: own pixels / 28^2.
  const MatchSettings ms;
  CHECK(size_allowance(28, 28, ms) == 1.0f);
  CHECK(size_allowance(640, 480, ms) == 1.0f);
  CHECK(size_allowance(0, 10, ms) == 1.0f);                           // size unknown
  CHECK(size_allowance(14, 14, ms) == Approx(0.25));                  // 196 / 784
  CHECK(size_allowance(14, 300, ms) == Approx(0.5));                  // 14 x 28 counted
  CHECK(size_allowance(300, 14, ms) == size_allowance(14, 300, ms));  // a turn does not change it
  MatchSettings off = ms;
  off.small_side = 0;
  CHECK(size_allowance(14, 14, off) == 1.0f);
  // A pair is judged by the geometric mean of the allowances.
  CHECK(pair_settings(ms, {14, 14}, {14, 14}, 0).min_correlation == Approx(1 - 0.005 * 0.25));
  CHECK(pair_settings(ms, {14, 14}, {28, 28}, 0).min_correlation == Approx(1 - 0.005 * 0.5));
  CHECK(pair_settings(ms, {28, 28}, {640, 480}, 0).min_correlation == ms.min_correlation);
  CHECK(pair_settings(ms, {28, 28}, {640, 480}, 0).max_local == ms.max_local);
}

TEST_CASE("distinct pictures under small_side are joined no more often than at 28 px", "[lookalike][truth][small]") {
  // Truth: Fashion-MNIST (Debian dataset-fashion-mnist), no two of whose 70,000
  // images share their pixels; reductions of distinct images are distinct
  // pictures. The first 20,000 training images as they are, then with every
  // other one reduced to 14x14 (OpenCV area interpolation), then with the
  // closer correlation for small pictures turned off. Measured (bench/small_pictures,
  // docs/lookalikes.md): pairs of two 14 px pictures are joined about ten
  // times as often as pairs at 28 px without it.
  auto img = test::read_idx_images(test::kFashionMnistDir / "train-images-idx3-ubyte.gz");
  const size_t n = std::min<size_t>(20000, img.count);
  std::vector<FileRecord> as_is(n), mixed(n);
  ThumbnailTable thumbs_as_is, thumbs_mixed;
  thumbs_as_is.assign_all(n);
  thumbs_mixed.assign_all(n);
  for (size_t i = 0; i < n; ++i) {
    const cv::Mat m(static_cast<int>(img.rows), static_cast<int>(img.cols), CV_8UC1, img.pixels.data() + i * img.rows * img.cols);
    cv::Mat small;
    if (i % 2 == 0) cv::resize(m, small, cv::Size(14, 14), 0, 0, cv::INTER_AREA);
    const cv::Mat& picture = i % 2 == 0 ? small : m;
    for (auto* set : {&as_is, &mixed}) {
      const cv::Mat& p = set == &as_is ? m : picture;
      FileRecord& r = (*set)[i];
      r.path = "c/" + std::to_string(1000000 + i) + ".png";
      r.kind = FileKind::image;
      r.features.has_lookalike = r.features.has_content_hash = true;
      r.features.content_hash = {i, 7};
      const Lookalike l = lookalike_features(p);
      r.features.look = l;
      r.probe.width = static_cast<uint32_t>(p.cols);
      r.probe.height = static_cast<uint32_t>(p.rows);
      (set == &as_is ? thumbs_as_is : thumbs_mixed).at(i) = l.thumb;
    }
  }
  const GroupSettings gs;
  GroupSettings off = gs;
  off.match.small_side = 0;
  const GroupResult base = find_groups(as_is, thumbs_as_is, gs);
  const GroupResult with_rule = find_groups(mixed, thumbs_mixed, gs);
  const GroupResult without = find_groups(mixed, thumbs_mixed, off);
  WARN("confirmed pairs: 28 px " << base.confirmed_pairs << ", half at 14 px " << with_rule.confirmed_pairs
                                 << ", the same without the closer correlation " << without.confirmed_pairs);
  CHECK(with_rule.confirmed_pairs <= base.confirmed_pairs);
  CHECK(without.confirmed_pairs >= 2 * with_rule.confirmed_pairs + 10);
}

TEST_CASE("the resampled comparison imitates OpenCV's reductions of small pictures", "[lookalike][match][small]") {
  // Reference: OpenCV's cv::resize with each interpolation, then the thumbnail
  // of the reduced picture (features.cc), against resample_thumbnail of the
  // full picture's thumbnail with the kernel named after that interpolation.
  // Pictures: the first 60 Fashion-MNIST training images (Debian
  // dataset-fashion-mnist), 28x28, reduced to 21, 14 and 9 px.
  auto img = test::read_idx_images(test::kFashionMnistDir / "train-images-idx3-ubyte.gz");
  const std::pair<int, ResampleKernel> ways[] = {{cv::INTER_AREA, ResampleKernel::area},
                                                 {cv::INTER_NEAREST, ResampleKernel::nearest},
                                                 {cv::INTER_LINEAR, ResampleKernel::linear},
                                                 {cv::INTER_CUBIC, ResampleKernel::cubic},
                                                 {cv::INTER_LANCZOS4, ResampleKernel::lanczos}};
  for (const auto& [interp, kernel] : ways)
    for (int side : {21, 14, 9}) {
      double diff = 0, worst_corr = 1, other = 0;
      for (size_t i = 0; i < 60; ++i) {
        const cv::Mat m(28, 28, CV_8UC1, img.pixels.data() + i * 784);
        cv::Mat small;
        cv::resize(m, small, cv::Size(side, side), 0, 0, interp);
        const Thumbnail want = lookalike_features(small).thumb;
        MatchSettings::Resample r;
        r.width = r.height = side;
        r.large_width = r.large_height = 28;
        Thumbnail got{}, wrong{};
        const Thumbnail full = lookalike_features(m).thumb;
        resample_thumbnail(full, r, kernel, got);
        // Another way of reducing, for contrast: what tells the ways apart.
        resample_thumbnail(full, r, kernel == ResampleKernel::nearest ? ResampleKernel::area : ResampleKernel::nearest, wrong);
        for (size_t k = 0; k < kGrayBytes; ++k) {
          diff += std::abs(int(got[k]) - int(want[k]));
          other += std::abs(int(wrong[k]) - int(want[k]));
        }
        worst_corr = std::min(worst_corr, thumb_correlation(got, thumb_stats(got), want, thumb_stats(want)));
      }
      diff /= 60.0 * kGrayBytes;
      other /= 60.0 * kGrayBytes;
      INFO("interpolation " << interp << " to " << side << " px: mean difference " << diff << " levels (another way "
                            << other << "), lowest correlation " << worst_corr);
      CHECK(diff <= 1.0);
      CHECK(worst_corr >= 0.999);
      CHECK(other >= 2 * diff);
    }
}

TEST_CASE("reduced copies of small pictures are joined through the resampled comparison", "[lookalike][truth][small]") {
  // Truth: every 700th Fashion-MNIST picture (Debian dataset-fashion-mnist) and
  // its reduction by OpenCV (half and three-quarter size, several
  // interpolations): copies by construction. Measured in bench/lookalike_truth
  // (350 sources): half-area and half-linear 0.98, three-quarter 0.97, half-cubic
  // 0.83, half-lanczos 0.64 (most of the rest are not candidates: their hashes
  // differ by 10-14 bits), none of them before the resampled comparison.
  std::vector<cv::Mat> sources;
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(test::fashion_mnist_tree()))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  for (size_t k = 0; k < files.size(); k += 700) sources.push_back(cv::imread(files[k].string(), cv::IMREAD_UNCHANGED));
  const std::map<std::string, double> floors = {
      {"half-area", 0.95}, {"half-linear", 0.95}, {"three-quarter-linear-q85", 0.93}, {"half-cubic", 0.7}, {"half-lanczos", 0.5}};
  const GroupSettings gs;
  for (const auto& k : test::planted_kinds()) {
    if (!floors.count(k.name)) continue;
    int found = 0, without = 0, total = 0;
    for (const auto& src : sources) {
      const auto bytes_a = test::encode_copy(src, 0);
      const Lookalike a = test::lookalike_of_bytes(bytes_a);
      const cv::Mat copy = k.make(src);
      const auto bytes_b = test::encode_copy(copy, k.jpeg_quality);
      const Lookalike b = test::lookalike_of_bytes(bytes_b);
      found += test::pair_joined(a, b, gs, test::picture_of_bytes(bytes_a), test::picture_of_bytes(bytes_b));
      // Sizes unknown: no resampled comparison.
      without += test::pair_joined(a, b, gs);
      ++total;
    }
    INFO(k.name << ": " << found << " of " << total << " (" << without << " without the resampled comparison)");
    CHECK(total == 100);
    CHECK(double(found) / total >= floors.at(k.name));
    CHECK(without <= total / 2);
  }
}

TEST_CASE("re-encoded copies of small pictures are joined through the re-encoded comparison", "[lookalike][truth][jpeg]") {
  // Truth: every 700th Fashion-MNIST picture (Debian dataset-fashion-mnist) and
  // its re-encoding by libjpeg-turbo (OpenCV's imwrite) at qualities 30-80:
  // copies by construction. Measured in bench/lookalike_truth (350 sources):
  // JPEG 30 0.55 -> 0.98, JPEG 50 0.78 -> 1.00, JPEG 75 0.98 -> 1.00.
  std::vector<cv::Mat> sources;
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(test::fashion_mnist_tree()))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  for (size_t k = 0; k < files.size(); k += 700) sources.push_back(cv::imread(files[k].string(), cv::IMREAD_UNCHANGED));
  const std::map<std::string, double> floors = {{"jpeg-q30", 0.95}, {"jpeg-q50", 0.97}, {"jpeg-q75", 0.98}, {"turn-270-q80", 0.98}};
  const GroupSettings gs;
  for (const auto& k : test::planted_kinds()) {
    if (!floors.count(k.name)) continue;
    int found = 0, without = 0, total = 0;
    for (const auto& src : sources) {
      const auto bytes_a = test::encode_copy(src, 0), bytes_b = test::encode_copy(k.make(src), k.jpeg_quality);
      const Lookalike a = test::lookalike_of_bytes(bytes_a), b = test::lookalike_of_bytes(bytes_b);
      const PictureSize sa = test::picture_of_bytes(bytes_a), sb = test::picture_of_bytes(bytes_b);
      CHECK(int(sb.jpeg_quality) == k.jpeg_quality);
      found += test::pair_joined(a, b, gs, sa, sb);
      // The quality unknown: no re-encoded comparison.
      without += test::pair_joined(a, b, gs, picture_size(sa.width, sa.height), picture_size(sb.width, sb.height));
      ++total;
    }
    INFO(k.name << ": " << found << " of " << total << " (" << without << " without the re-encoded comparison)");
    CHECK(total == 100);
    CHECK(double(found) / total >= floors.at(k.name));
    if (k.name == "jpeg-q30") CHECK(without <= 80);
  }
}

TEST_CASE("distinct small pictures, half of them JPEGs, are not joined by the re-encoded comparison", "[lookalike][truth][jpeg]") {
  // Truth: the first 6,000 Fashion-MNIST training pictures (Debian
  // dataset-fashion-mnist), as PNGs, then with every other one re-encoded by
  // libjpeg-turbo at quality 30, 50 or 75. A pair the re-encoded comparison
  // joins must be one whose PNG pictures are grouped too (Fashion-MNIST holds
  // near-copies of its own).
  auto img = test::read_idx_images(test::kFashionMnistDir / "train-images-idx3-ubyte.gz");
  const size_t n = std::min<size_t>(6000, img.count);
  std::vector<FileRecord> png(n), mixed(n);
  ThumbnailTable thumbs_png, thumbs_mixed;
  thumbs_png.assign_all(n);
  thumbs_mixed.assign_all(n);
  for (size_t i = 0; i < n; ++i) {
    const cv::Mat m(static_cast<int>(img.rows), static_cast<int>(img.cols), CV_8UC1, img.pixels.data() + i * img.rows * img.cols);
    const int q = i % 2 == 0 ? 0 : (i / 2) % 3 == 0 ? 30 : (i / 2) % 3 == 1 ? 50 : 75;
    for (auto* set : {&png, &mixed}) {
      const auto bytes = test::encode_copy(m, set == &png ? 0 : q);
      FileRecord& r = (*set)[i];
      r.path = "c/" + std::to_string(1000000 + i) + (set == &png || q == 0 ? ".png" : ".jpg");
      r.kind = FileKind::image;
      r.probe = probe_bytes(bytes).info;
      r.features.has_lookalike = r.features.has_content_hash = true;
      r.features.content_hash = {i, 9};
      const Lookalike l = test::lookalike_of_bytes(bytes);
      r.features.look = l;
      (set == &png ? thumbs_png : thumbs_mixed).at(i) = l.thumb;
    }
  }
  const GroupSettings gs;
  const GroupResult as_png = find_groups(png, thumbs_png, gs);
  const GroupResult with_jpeg = find_groups(mixed, thumbs_mixed, gs);
  std::vector<int> group_of(n, -1);
  for (size_t g = 0; g < as_png.groups.size(); ++g)
    for (uint32_t m : as_png.groups[g].members) group_of[m] = int(g);
  int reencoded = 0, wrong = 0;
  for (const auto& g : with_jpeg.groups)
    for (const auto& l : g.links)
      if (l.jpeg_quality > 0) {
        ++reencoded;
        wrong += group_of[l.a] < 0 || group_of[l.a] != group_of[l.b];
      }
  WARN("confirmed pairs: as PNGs " << as_png.confirmed_pairs << ", half JPEG " << with_jpeg.confirmed_pairs << "; "
                                   << reencoded << " links by the re-encoded comparison, " << wrong
                                   << " of pictures the PNGs do not group");
  CHECK(wrong == 0);
  CHECK(with_jpeg.confirmed_pairs <= as_png.confirmed_pairs + 2);
}
