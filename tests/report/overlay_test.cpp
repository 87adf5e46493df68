// Overlays: windowing, side states, drawing, PNG and base64.
#include <algorithm>
#include <cmath>
#include <vector>

#include <doctest/doctest.h>
#include <opencv2/imgcodecs.hpp>

#include "beamtrim/overlay.h"
#include "report/fixtures.h"
#include "report/palette.h"

namespace beamtrim {
namespace {

using testing::MakePhantom;
using testing::MakePhantomRecord;
using testing::PhantomGeometry;

std::array<int, 3> PixelAt(const RgbImage& img, int x, int y) {
  const size_t i = (static_cast<size_t>(y) * img.width + x) * 3;
  return {img.rgb[i], img.rgb[i + 1], img.rgb[i + 2]};
}

bool NearColour(std::array<int, 3> px, report_palette::Rgb c, int tolerance) {
  return std::abs(px[0] - c.r) <= tolerance && std::abs(px[1] - c.g) <= tolerance &&
         std::abs(px[2] - c.b) <= tolerance;
}

}  // namespace

// Source: RFC 4648, section 10 (test vectors).
TEST_CASE("Base64MatchesRfc4648TestVectors") {
  auto b64 = [](const std::string& s) {
    return Base64Encode(std::vector<uint8_t>(s.begin(), s.end()));
  };
  CHECK(b64("") == "");
  CHECK(b64("f") == "Zg==");
  CHECK(b64("fo") == "Zm8=");
  CHECK(b64("foo") == "Zm9v");
  CHECK(b64("foob") == "Zm9vYg==");
  CHECK(b64("fooba") == "Zm9vYmE=");
  CHECK(b64("foobar") == "Zm9vYmFy");
}

// Reference: percentiles by a full sort of log(values) inside the field, nearest-rank on the
// lower side (the same rank rule the implementation documents).
TEST_CASE("DisplayWindowPercentilesMatchFullSortInLogDomain") {
  PhantomGeometry g;
  Image image = MakePhantom(g);
  const Polygon field = RectPolygon(g.fx0, g.fy0, g.fx1, g.fy1);
  DisplayWindow w = ComputeDisplayWindow(image, /*linear=*/true, field, 1.0, 99.0);
  CHECK(w.log_domain);
  std::vector<double> inside;
  for (int y = 0; y < g.height; ++y)
    for (int x = 0; x < g.width; ++x)
      if (x + 0.5 >= g.fx0 && x + 0.5 < g.fx1 && y + 0.5 >= g.fy0 && y + 0.5 < g.fy1)
        inside.push_back(std::log(image.at(x, y)));
  std::sort(inside.begin(), inside.end());
  auto pct = [&](double p) { return inside[static_cast<size_t>(p / 100.0 * (inside.size() - 1))]; };
  CHECK(w.low == doctest::Approx(pct(1.0)));
  CHECK(w.high == doctest::Approx(pct(99.0)));
}

// A radiograph reads with more radiation darker: open field dark, anatomy lighter, blocked
// border white (common practice of radiograph display, no single source).
TEST_CASE("WindowedRadiographShowsAnatomyLightOnDark") {
  PhantomGeometry g;
  Image image = MakePhantom(g);
  const Polygon field = RectPolygon(g.fx0, g.fy0, g.fx1, g.fy1);
  std::vector<uint8_t> grey = ApplyDisplayWindow(image, ComputeDisplayWindow(image, true, field));
  auto at = [&](int x, int y) { return grey[static_cast<size_t>(y) * g.width + x]; };
  const int open = at(80, 60), anatomy = at(200, 150), blocked = at(10, 10);
  CHECK(open < anatomy);
  CHECK(anatomy <= blocked);
  CHECK(blocked == 255);
  CHECK(open == 0);
}

TEST_CASE("FlatImageGetsAUsableWindow") {
  Image image(50, 40, 7.0f);
  DisplayWindow w = ComputeDisplayWindow(image, false);
  CHECK(w.high > w.low);
  std::vector<uint8_t> grey = ApplyDisplayWindow(image, w);
  CHECK(grey.size() == 2000u);
}

TEST_CASE("SideStateGivesClippingPrecedenceOverVisibility") {
  ImageRecord r = MakePhantomRecord();
  CHECK(ClassifySide(r, Side::kLeft) == SideState::kVisible);
  CHECK(ClassifySide(r, Side::kBottom) == SideState::kNotVisible);
  r.anatomy->clipped_sides = {Side::kLeft};
  CHECK(ClassifySide(r, Side::kLeft) == SideState::kClipped);
  r.field->blanked_or_cropped_sides = {Side::kTop};
  CHECK(ClassifySide(r, Side::kTop) == SideState::kNotAssessable);
  CHECK(std::string(SideStateLabel(SideState::kNotVisible)) == "no border visible");
}

TEST_CASE("OverlayDrawsEachSideInItsStyleAndShadesOnlyTheExcess") {
  PhantomGeometry g;
  Image image = MakePhantom(g);
  ImageRecord r = MakePhantomRecord(g);
  OverlayOptions o;
  o.legend = false;
  Result<RgbImage> out = RenderOverlay(image, true, r, o);
  REQUIRE(out.ok());
  REQUIRE(out->width == g.width);
  REQUIRE(out->height == g.height);
  // Left border (visible, solid): bluish green somewhere on the line x = 60 near y = 100..200
  // (labels sit at the middle, so probe away from it).
  int visible_hits = 0, dashed_hits = 0, dashed_gaps = 0;
  for (int y = 70; y < 120; ++y)
    visible_hits += NearColour(PixelAt(*out, 60, y), report_palette::kBorderVisible, 40);
  CHECK(visible_hits > 40);
  // Bottom side (no border, dashed): orange with gaps along y = 260 (the line is drawn at the
  // last row of the image here, so probe row 259/260 clamped).
  for (int x = 70; x < 140; ++x) {
    const bool hit = NearColour(PixelAt(*out, x, std::min(g.height - 1, 259)),
                                report_palette::kBorderNotVisible, 40);
    dashed_hits += hit;
    dashed_gaps += !hit;
  }
  CHECK(dashed_hits > 10);
  CHECK(dashed_gaps > 10);
  // Excess area (open field outside the box) carries the yellow tint: red channel above blue.
  auto excess = PixelAt(*out, 100, 230);
  CHECK(excess[0] > excess[2]);
  // Inside the anatomy box, away from its outline: untinted grey.
  auto inside = PixelAt(*out, 200, 150);
  CHECK(inside[0] == inside[2]);
  CHECK(inside[1] == inside[2]);
}

TEST_CASE("OverlayWidthKeepsAspectAndLegendAddsAStrip") {
  PhantomGeometry g;
  Image image = MakePhantom(g);
  ImageRecord r = MakePhantomRecord(g);
  OverlayOptions o;
  o.width_px = 800;
  o.title = "Case C-1234AB";
  Result<RgbImage> out = RenderOverlay(image, true, r, o);
  REQUIRE(out.ok());
  CHECK(out->width == 800);
  CHECK(out->height > 600);  // 400x300 scaled by 2 plus the legend
}

TEST_CASE("OverlayRefusesARecordOfAnotherSize") {
  Image image = MakePhantom();
  ImageRecord r = MakePhantomRecord();
  r.rows = 512;
  Result<RgbImage> out = RenderOverlay(image, true, r);
  REQUIRE_FALSE(out.ok());
  CHECK(out.error().reason.find("512") != std::string::npos);
  Image empty;
  CHECK_FALSE(RenderOverlay(empty, true, r).ok());
}

TEST_CASE("OverlayWithoutFieldStillRendersTheImage") {
  Image image = MakePhantom();
  ImageRecord r = MakePhantomRecord();
  r.field.reset();
  r.anatomy.reset();
  Result<RgbImage> out = RenderOverlay(image, true, r);
  CHECK(out.ok());
}

// Independent check: OpenCV's PNG decoder reads back exactly the raster we encoded.
TEST_CASE("PngRoundTripsThroughAnIndependentDecoder") {
  Image image = MakePhantom();
  Result<RgbImage> out = RenderOverlay(image, true, MakePhantomRecord());
  REQUIRE(out.ok());
  Result<std::vector<uint8_t>> png = EncodePng(*out);
  REQUIRE(png.ok());
  CHECK((*png)[1] == 'P');
  cv::Mat back = cv::imdecode(*png, cv::IMREAD_COLOR);  // BGR
  REQUIRE(back.cols == out->width);
  REQUIRE(back.rows == out->height);
  bool same = true;
  for (int y = 0; y < back.rows && same; y += 7)
    for (int x = 0; x < back.cols && same; x += 5) {
      auto px = PixelAt(*out, x, y);
      cv::Vec3b b = back.at<cv::Vec3b>(y, x);
      same = b[2] == px[0] && b[1] == px[1] && b[0] == px[2];
    }
  CHECK(same);
}

}  // namespace beamtrim
