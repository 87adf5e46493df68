// Anatomy inside the field on small rendered images with known truth (synthetic ground
// truth): box along the field axes, markers left out, clipping, a field inside the body.
#include <doctest/doctest.h>

#include <cmath>
#include <random>
#include <vector>

#include "analysis/metrics_test_util.h"
#include "beamtrim/anatomy.h"
#include "beamtrim/rules.h"

using namespace beamtrim;
using namespace beamtrim::testing;

namespace {

constexpr double kPixelMm = 0.5;

struct Scene {
  double cx = 200, cy = 150;           // field centre, px
  double hw = 150, hh = 110;           // field half sizes, px
  double rot = 0.0;                    // field and anatomy rotation, degrees
  double ax = 0, ay = 0;               // anatomy centre relative to the field centre, field frame
  double a = 60, b = 40;               // anatomy ellipse semi-axes, px (field frame)
  double mu = 1.2;                     // peak log attenuation of the anatomy
  bool body_fills = false;             // a textured body over the whole image
  bool marker = false;                 // lead marker square in the direct exposure
  double marker_u = 110, marker_v = -80, marker_half = 10;
  double noise = 0.02;                 // relative quantum noise
  // More ellipses {u, v, a, b, mu} in the field frame, attenuating like the first one.
  std::vector<std::array<double, 5>> extra;
};

// Linear exposure: open field 1000, blocked 5 %, the anatomy attenuates exp(-mu sqrt(1 - r^2)).
Image Render(const Scene& s, int w = 400, int h = 300) {
  Image img(w, h);
  std::mt19937 rng(7);
  std::normal_distribution<double> gauss(0.0, 1.0);
  double r = s.rot * 3.14159265358979323846 / 180.0, c = std::cos(r), sn = std::sin(r);
  for (int y = 0; y < h; ++y) {
    for (int x = 0; x < w; ++x) {
      double dx = x + 0.5 - s.cx, dy = y + 0.5 - s.cy;
      double u = dx * c + dy * sn, v = -dx * sn + dy * c;
      bool in_field = std::fabs(u) <= s.hw && std::fabs(v) <= s.hh;
      double val = in_field ? 1000.0 : 50.0;
      double eu = (u - s.ax) / s.a, ev = (v - s.ay) / s.b;
      double rr = eu * eu + ev * ev;
      if (rr < 1.0) val *= std::exp(-s.mu * std::sqrt(1.0 - rr));
      for (const auto& e : s.extra) {
        double fu = (u - e[0]) / e[2], fv = (v - e[1]) / e[3];
        double q = fu * fu + fv * fv;
        if (q < 1.0) val *= std::exp(-e[4] * std::sqrt(1.0 - q));
      }
      if (s.body_fills) val *= std::exp(-1.0 - 0.4 * std::sin(x * 0.05) * std::cos(y * 0.07));
      if (s.marker && std::fabs(u - s.marker_u) < s.marker_half &&
          std::fabs(v - s.marker_v) < s.marker_half) {
        val = 45.0;
      }
      img.at(x, y) = static_cast<float>(val * (1.0 + s.noise * gauss(rng)));
    }
  }
  return img;
}

AnatomyMeasurement Find(const Scene& s, const Image& img) {
  FieldMeasurement f = MakeField(s.cx, s.cy, s.hw, s.hh, s.rot, img.width(), img.height());
  AnatomyContext ctx{std::array<double, 2>{kPixelMm, kPixelMm}, true};
  return FindAnatomy(img, f, ctx);
}

// The truth box of the ellipse, along the field axes, in image pixels.
Polygon TruthBox(const Scene& s, double clip_u1 = 1e9) {
  double u1 = std::min(s.ax + s.a, clip_u1);
  auto c = RotatedBox(s.ax - s.a, u1, s.ay - s.b, s.ay + s.b, s.rot);
  Polygon p;
  for (const Point2d& q : c) p.push_back({q.x + s.cx, q.y + s.cy});
  return p;
}

double BoxErrorMm(const AnatomyMeasurement& a, const Polygon& truth) {
  REQUIRE(a.box_px);
  Polygon got(a.box_px->begin(), a.box_px->end());
  return HausdorffDistance(got, truth, 0.5) * kPixelMm;
}

bool Clipped(const AnatomyMeasurement& a, Side s) {
  for (Side c : a.clipped_sides) {
    if (c == s) return true;
  }
  return false;
}

}  // namespace

TEST_CASE("AnatomyBoxMatchesAnEllipseOfKnownSize") {
  Scene s;
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  CHECK(BoxErrorMm(a, TruthBox(s)) < 1.0);
  CHECK(a.clipped_sides.empty());
  // Ellipse area pi a b = 7540 px = 1885 mm2, found at about 1 mm resolution.
  REQUIRE(a.area_mm2);
  CHECK(*a.area_mm2 == doctest::Approx(3.14159 * 60 * 40 * 0.25).epsilon(0.1));
  // The box is clockwise on screen and the hull lies inside it.
  Polygon box(a.box_px->begin(), a.box_px->end());
  CHECK(SignedArea(box) > 0.0);
  CHECK(Area(a.hull_px) <= Area(box) + 1e-6);
}

TEST_CASE("AnatomyBoxFollowsARotatedField") {
  for (double rot : {15.0, -30.0, 40.0}) {
    CAPTURE(rot);
    Scene s;
    s.rot = rot;
    s.ax = 10;
    s.ay = -5;
    Image img = Render(s);
    AnatomyMeasurement a = Find(s, img);
    REQUIRE(a.found);
    CHECK(BoxErrorMm(a, TruthBox(s)) < 1.0);
  }
}

TEST_CASE("LeadMarkerInTheDirectExposureIsNotAnatomy") {
  Scene s;
  s.marker = true;
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  // With the marker counted, the box would reach u = 120 instead of 60 (30 mm).
  CHECK(BoxErrorMm(a, TruthBox(s)) < 1.0);
  // A marker at the field edge, partly in the penumbra, is left out too.
  s.marker_u = 140;
  s.marker_v = 95;
  Image edge = Render(s);
  CHECK(BoxErrorMm(Find(s, edge), TruthBox(s)) < 1.0);
}

TEST_CASE("AnatomyRunningIntoABladeIsClipped") {
  Scene s;
  s.ax = 110;  // ellipse reaches u = 170, the right blade is at u = 150
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  CHECK(Clipped(a, Side::kRight));
  CHECK_FALSE(Clipped(a, Side::kLeft));
  CHECK_FALSE(Clipped(a, Side::kTop));
  CHECK_FALSE(Clipped(a, Side::kBottom));
  CHECK(BoxErrorMm(a, TruthBox(s, 150.0)) < 1.0);
}

TEST_CASE("AnatomyNotTouchingABladeIsNotClipped") {
  Scene s;
  s.ax = 85;  // ellipse ends 5 px = 2.5 mm before the right blade
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  CHECK(a.clipped_sides.empty());
  CHECK(BoxErrorMm(a, TruthBox(s)) < 1.0);
}

TEST_CASE("FieldInsideTheBodyIsAllAnatomy") {
  Scene s;
  s.body_fills = true;
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  Polygon field = MakeField(s.cx, s.cy, s.hw, s.hh, s.rot, 400, 300).polygon_px;
  CHECK(BoxErrorMm(a, field) < 0.01);
  CHECK(a.clipped_sides.size() == 4);
}

TEST_CASE("EmptyFieldHasNoAnatomy") {
  Scene s;
  s.a = 0.01;
  s.b = 0.01;
  Image img = Render(s);
  // Flat direct exposure only: no tissue class separates from the noise.
  AnatomyMeasurement a = Find(s, img);
  CHECK_FALSE(a.found);
  CHECK_FALSE(a.box_px);
}

TEST_CASE("NoFieldGivesNoAnatomy") {
  Image img(50, 40, 100.0f);
  FieldMeasurement none;
  CHECK_FALSE(FindAnatomy(img, none, AnatomyContext{}).found);
}

// ---- Direct exposure beside thin tissue and metal ------------------------------------------

TEST_CASE("ThinSoftTissueBesideDenseBoneIsAnatomy") {
  // Synthetic ground truth: a thin soft-tissue ellipse (log attenuation 0.3 at its centre)
  // holding a dense bone (2.5 more). A two-class split puts the soft tissue with the direct
  // exposure; the box must still be the soft tissue's outline.
  for (bool linear : {true, false}) {
    CAPTURE(linear);
    Scene s;
    s.mu = 0.3;
    s.extra = {{0, 0, 20, 12, 2.5}};
    Image img = Render(s);
    if (!linear) {
      for (int y = 0; y < img.height(); ++y) {
        for (int x = 0; x < img.width(); ++x) img.at(x, y) = std::log(img.at(x, y));
      }
    }
    FieldMeasurement f = MakeField(s.cx, s.cy, s.hw, s.hh, s.rot, img.width(), img.height());
    AnatomyContext ctx{std::array<double, 2>{kPixelMm, kPixelMm}, linear};
    AnatomyMeasurement a = FindAnatomy(img, f, ctx);
    REQUIRE(a.found);
    CHECK(BoxErrorMm(a, TruthBox(s)) < 1.5);
  }
}

TEST_CASE("FaintSoftTissueOnAShadedProcessedImageIsAnatomy") {
  // Synthetic ground truth: a faint soft-tissue ellipse (log attenuation 0.2 at its centre)
  // holding dense bone, on a processed (log) image whose open field carries a smooth bump of
  // 0.1 over about 6 cm, as unsharp masking leaves it (a plane cannot follow it). The soft
  // tissue's outline is a step against the open field beside it, so the box must be the soft
  // tissue's outline (within 4 mm: the ellipse thins to nothing at its rim, where no
  // threshold above the noise can reach), not the bone's (about 28 mm off). Common practice,
  // no single source: the skin line, not a global level, separates patient and open field.
  Scene s;
  s.mu = 0.2;
  s.a = 70;
  s.b = 50;
  s.extra = {{0, 0, 25, 15, 2.5}};
  Image img = Render(s);
  for (int y = 0; y < img.height(); ++y) {
    for (int x = 0; x < img.width(); ++x) {
      double dx = x + 0.5 - s.cx, dy = y + 0.5 - s.cy;
      double bump = 0.1 * std::exp(-(dx * dx + dy * dy) / (2.0 * 120.0 * 120.0));
      img.at(x, y) = static_cast<float>(std::log(img.at(x, y)) + bump);
    }
  }
  FieldMeasurement f = MakeField(s.cx, s.cy, s.hw, s.hh, s.rot, img.width(), img.height());
  AnatomyContext ctx{std::array<double, 2>{kPixelMm, kPixelMm}, false};
  AnatomyMeasurement a = FindAnatomy(img, f, ctx);
  REQUIRE(a.found);
  CHECK(BoxErrorMm(a, TruthBox(s)) < 4.0);
}

TEST_CASE("FieldInsideTheBodyWithALeadMarkerIsAllAnatomy") {
  // The marker is the darkest class; the rest of the field is tissue, not direct exposure.
  Scene s;
  s.body_fills = true;
  s.marker = true;
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  Polygon field = MakeField(s.cx, s.cy, s.hw, s.hh, s.rot, 400, 300).polygon_px;
  CHECK(BoxErrorMm(a, field) < 0.01);
}

TEST_CASE("DenseThumbApartFromTheHandIsNotTakenForALeadMarker") {
  // A separate blob 24 px (12 mm) wide, denser than the main body: tissue, not a lead letter
  // (strokes of a few mm). Synthetic ground truth: the box spans both ellipses.
  Scene s;
  s.extra = {{-95, 0, 24, 40, 2.0}};
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  auto c = RotatedBox(-119, s.a, -s.b, s.b, s.rot);
  Polygon truth;
  for (const Point2d& q : c) truth.push_back({q.x + s.cx, q.y + s.cy});
  CHECK(BoxErrorMm(a, truth) < 1.5);
}

// ---- Clipping: ends of the long axis and cut-offs (docs/method.md, "Clipping") ------------

namespace {

bool Has(const std::vector<Side>& v, Side s) { return std::find(v.begin(), v.end(), s) != v.end(); }

Rule RuleThrough(Continuation c) {
  Rule r;
  r.continues_through = c;
  return r;
}

}  // namespace

TEST_CASE("LimbRunningThroughBothEndsIsNotACutOffUnderALimbRule") {
  // Synthetic ground truth: a limb (ellipse 80 x 400 px) longer than the field (220 px), at
  // several field angles; it runs through the top and bottom blades and ends nowhere else.
  for (double rot : {0.0, 20.0, -35.0}) {
    CAPTURE(rot);
    Scene s;
    s.rot = rot;
    s.a = 40;
    s.b = 200;
    AnatomyMeasurement a = Find(s, Render(s));
    REQUIRE(a.found);
    CHECK(a.at_blade_sides.size() == 2);
    CHECK(Has(a.at_blade_sides, Side::kTop));
    CHECK(Has(a.at_blade_sides, Side::kBottom));
    REQUIRE(a.ends);
    CHECK(Has({(*a.ends)[0], (*a.ends)[1]}, Side::kTop));
    CHECK(Has({(*a.ends)[0], (*a.ends)[1]}, Side::kBottom));
    CHECK(CutOffSides(a.at_blade_sides, a.ends, a.continuing_end,
                      RuleThrough(Continuation::kBothEnds)).empty());
    CHECK(CutOffSides(a.at_blade_sides, a.ends, a.continuing_end,
                      RuleThrough(Continuation::kNone)).size() == 2);
  }
}

TEST_CASE("LimbCutAlongItsSideIsACutOff") {
  // The same limb moved right so that its side crosses the right blade (u = 150).
  Scene s;
  s.a = 40;
  s.b = 200;
  s.ax = 125;
  AnatomyMeasurement a = Find(s, Render(s));
  REQUIRE(a.found);
  CHECK(Has(a.at_blade_sides, Side::kRight));
  std::vector<Side> cut = CutOffSides(a.at_blade_sides, a.ends, a.continuing_end,
                                      RuleThrough(Continuation::kBothEnds));
  CHECK(cut == std::vector<Side>{Side::kRight});
  CHECK(CutOffSides(a.at_blade_sides, a.ends, a.continuing_end,
                    RuleThrough(Continuation::kAllSides)).empty());
}

TEST_CASE("FingertipsAtTheFarBladeAreACutOffTheForearmIsNot") {
  // Synthetic ground truth, a hand in outline: a forearm (90 px wide) through the bottom
  // blade, a palm, and four fingers (16 px wide) reaching past the top blade (v = -110).
  Scene s;
  s.a = 55;
  s.b = 45;
  s.ay = -20;
  s.extra = {{0, 70, 45, 150, 1.2}};
  for (double u : {-39.0, -13.0, 13.0, 39.0}) s.extra.push_back({u, -100, 8, 50, 0.8});
  AnatomyMeasurement a = Find(s, Render(s));
  REQUIRE(a.found);
  CHECK(Has(a.at_blade_sides, Side::kTop));
  CHECK(Has(a.at_blade_sides, Side::kBottom));
  REQUIRE(a.continuing_end);
  CHECK(*a.continuing_end == Side::kBottom);
  CHECK(CutOffSides(a.at_blade_sides, a.ends, a.continuing_end,
                    RuleThrough(Continuation::kOneEnd)) == std::vector<Side>{Side::kTop});
}

TEST_CASE("ForearmUnderAProcessingHaloAtTheBladeStillContinuesThroughIt") {
  // Synthetic ground truth: a forearm (90 px = 45 mm wide, log attenuation 0.5 at its axis)
  // runs through the bottom blade of a processed (log) image. Edge enhancement lightens
  // everything within about a centimetre of each blade edge, tissue included, by up to 0.6:
  // more than the forearm's attenuation near its outline. Measured against the open field
  // along the same edge at the same depth, the forearm still runs along the blade for about
  // its width, so the bottom is the end where the limb continues (not a cut-off under a
  // one-end rule). Common practice, no single source: unsharp masking leaves a halo that
  // depends on the distance to a strong edge.
  Scene s;
  s.a = 55;
  s.b = 45;
  s.ay = -20;
  s.mu = 0.5;
  s.extra = {{0, 70, 45, 150, 0.5}};
  Image img = Render(s);
  for (int y = 0; y < img.height(); ++y) {
    for (int x = 0; x < img.width(); ++x) {
      double du = std::fabs(x + 0.5 - s.cx), dv = std::fabs(y + 0.5 - s.cy);
      double d = std::min(s.hw - du, s.hh - dv);  // px inside the nearest blade edge
      double halo = d >= 0.0 ? 0.6 * std::exp(-d / 12.0) : 0.0;
      img.at(x, y) = static_cast<float>(std::log(img.at(x, y)) + halo);
    }
  }
  FieldMeasurement f = MakeField(s.cx, s.cy, s.hw, s.hh, s.rot, img.width(), img.height());
  AnatomyContext ctx{std::array<double, 2>{kPixelMm, kPixelMm}, false};
  AnatomyMeasurement a = FindAnatomy(img, f, ctx);
  REQUIRE(a.found);
  CHECK(Has(a.at_blade_sides, Side::kBottom));
  REQUIRE(a.continuing_end);
  CHECK(*a.continuing_end == Side::kBottom);
  CHECK(CutOffSides(a.at_blade_sides, a.ends, a.continuing_end,
                    RuleThrough(Continuation::kOneEnd)).empty());
}

TEST_CASE("NarrowOpenStripBesideALimbFillingMostOfTheFieldIsFound") {
  // Synthetic ground truth: a thick limb (log attenuation 1.5 at its axis, a dense bone along
  // it) fills the field but for a 20 mm strip of open field along the right blade, as on a
  // knee or an ankle collimated tightly on three sides. Every split of the whole field puts the
  // limb's thin flank with the strip, and the plane of such a class, carried across the field,
  // makes a strip of thick tissue along the left blade look as light as the open strip. The
  // box must end at the limb's outline (u = 110 px, 20 mm inside the right blade), and the
  // right side is no cut-off. Common practice, no single source: direct exposure is one flat
  // level bounded by the skin line.
  Scene s;
  s.ax = -60;
  s.a = 170;
  s.b = 400;
  s.mu = 1.5;
  s.extra = {{-60, 0, 30, 400, 2.0}};
  Image img = Render(s);
  AnatomyMeasurement a = Find(s, img);
  REQUIRE(a.found);
  auto c = RotatedBox(-s.hw, s.ax + s.a, -s.hh, s.hh, s.rot);
  Polygon truth;
  for (const Point2d& q : c) truth.push_back({q.x + s.cx, q.y + s.cy});
  CHECK(BoxErrorMm(a, truth) < 2.0);
  CHECK(!Clipped(a, Side::kRight));
}
