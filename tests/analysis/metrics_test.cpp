// Excess area, receptor, declared-vs-delivered and verdict, checked against independent
// computations (OpenCV rasterisation and convex intersection) and published limits.
#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "analysis/metrics_test_util.h"
#include "beamtrim/metrics.h"
#include "beamtrim/record.h"
#include "beamtrim/rules.h"

using namespace beamtrim;
using namespace beamtrim::testing;

namespace {

AnatomyMeasurement BoxAnatomy(double u0, double u1, double v0, double v1, double rot_deg) {
  AnatomyMeasurement a;
  a.found = true;
  a.box_px = RotatedBox(u0, u1, v0, v1, rot_deg);
  return a;
}

// Independent reference: rasterise both polygons at 8x sub-pixel with cv::fillPoly and count.
double RasterOutsideFraction(const Polygon& field, const Polygon& box, int w, int h) {
  const int ss = 8;
  auto raster = [&](const Polygon& poly) {
    cv::Mat m = cv::Mat::zeros(h * ss, w * ss, CV_8U);
    std::vector<cv::Point> pts;
    for (const Point2d& p : poly) pts.emplace_back(cvRound(p.x * ss * 16), cvRound(p.y * ss * 16));
    std::vector<std::vector<cv::Point>> polys{pts};
    cv::fillPoly(m, polys, cv::Scalar(255), cv::LINE_8, 4);
    return m;
  };
  cv::Mat f = raster(field), b = raster(box);
  double in_field = cv::countNonZero(f);
  return cv::countNonZero(f & ~b) / in_field;
}

double ConvexOutsideFraction(const Polygon& field, const Polygon& box) {
  std::vector<cv::Point2f> a, b, out;
  for (const Point2d& p : field) a.emplace_back(static_cast<float>(p.x), static_cast<float>(p.y));
  for (const Point2d& p : box) b.emplace_back(static_cast<float>(p.x), static_cast<float>(p.y));
  double inter = cv::intersectConvexConvex(a, b, out, true);
  double area = cv::contourArea(a);
  return (area - inter) / area;
}

}  // namespace

TEST_CASE("ExcessAreaAgreesWithRasterisedAndConvexReferences") {
  const std::array<double, 2> spacing{0.2, 0.2};
  for (double rot : {0.0, 12.0, -30.0, 44.0}) {
    CAPTURE(rot);
    FieldMeasurement f = MakeField(400, 300, 150, 110, rot, 800, 600);
    AnatomyMeasurement a = BoxAnatomy(-60, 90, -70, 40, rot);
    // Anatomy coordinates are relative to the field centre; shift into the image.
    for (Point2d& p : *a.box_px) p = {p.x + 400, p.y + 300};
    ExcessMeasurement e = ComputeExcess(f, a, spacing, 1.25, 0.0);
    Polygon box(a.box_px->begin(), a.box_px->end());
    REQUIRE(e.fraction_at_0mm);
    CHECK(*e.fraction_at_0mm == doctest::Approx(ConvexOutsideFraction(f.polygon_px, box)).epsilon(1e-3));
    CHECK(*e.fraction_at_0mm == doctest::Approx(RasterOutsideFraction(f.polygon_px, box, 800, 600)).epsilon(5e-3));
    // Field 300 x 220 px, box 150 x 110 px, all inside: 1 - 16500 / 66000 = 0.75 exactly.
    CHECK(*e.fraction_at_0mm == doctest::Approx(0.75));
    CHECK(*e.area_mm2 == doctest::Approx(49500.0 * 0.04));
    CHECK(*e.area_patient_mm2 == doctest::Approx(49500.0 * 0.04 / (1.25 * 1.25)));
    // Per side, at the detector: left 150-60, right 150-90, top 110-70, bottom 110-40 px.
    CHECK(*e.per_side_mm[0] == doctest::Approx(90 * 0.2));
    CHECK(*e.per_side_mm[1] == doctest::Approx(60 * 0.2));
    CHECK(*e.per_side_mm[2] == doctest::Approx(40 * 0.2));
    CHECK(*e.per_side_mm[3] == doctest::Approx(70 * 0.2));
    CHECK(*e.per_side_patient_mm[0] == doctest::Approx(90 * 0.2 / 1.25));
  }
}

TEST_CASE("MarginGrowsTheBoxOnEverySide") {
  FieldMeasurement f = MakeField(400, 300, 150, 110, 0.0, 800, 600);
  AnatomyMeasurement a = BoxAnatomy(300, 450, 230, 340, 0.0);
  ExcessMeasurement e = ComputeExcess(f, a, std::array<double, 2>{0.5, 0.5}, std::nullopt, 10.0);
  // 10 mm = 20 px each side: box 190 x 150 px inside a 300 x 220 px field.
  REQUIRE(e.fraction_at_margin);
  CHECK(*e.fraction_at_margin == doctest::Approx(1.0 - 190.0 * 150.0 / 66000.0));
  CHECK(e.margin_mm == 10.0);
  CHECK_FALSE(e.area_patient_mm2);  // no magnification known
  CHECK_FALSE(e.per_side_patient_mm[0]);
}

TEST_CASE("SidesThatAreNotVisibleAreNotAssessableNotZero") {
  // The field runs off the image on the right and the bottom.
  FieldMeasurement f = MakeField(700, 500, 200, 200, 0.0, 800, 600);
  AnatomyMeasurement a = BoxAnatomy(600, 700, 400, 550, 0.0);
  ExcessMeasurement e = ComputeExcess(f, a, std::array<double, 2>{0.2, 0.2}, 1.1, 0.0);
  CHECK(e.per_side_mm[0]);
  CHECK_FALSE(e.per_side_mm[1]);
  CHECK(e.per_side_mm[2]);
  CHECK_FALSE(e.per_side_mm[3]);
  ReceptorMeasurement r = ComputeReceptor(f, 600, 800, std::array<double, 2>{0.2, 0.2},
                                          std::nullopt, 1000.0);
  CHECK(r.assessable[0]);
  CHECK_FALSE(r.assessable[1]);
  CHECK_FALSE(r.centre_offset_mm);     // field centre unknown
  CHECK_FALSE(r.pbl_within_limits);    // field size unknown
}

TEST_CASE("WithoutSpacingOnlyFractionsAreGiven") {
  FieldMeasurement f = MakeField(400, 300, 150, 110, 0.0, 800, 600);
  AnatomyMeasurement a = BoxAnatomy(300, 450, 230, 340, 0.0);
  ExcessMeasurement e = ComputeExcess(f, a, std::nullopt, 1.2, 10.0);
  CHECK(e.fraction_at_0mm);
  CHECK_FALSE(e.area_mm2);
  CHECK_FALSE(e.fraction_at_margin);
  CHECK_FALSE(e.per_side_mm[0]);
}

TEST_CASE("ReceptorCentreAndPositiveBeamLimitation") {
  // Image 2150 x 2150 px at 0.2 mm = 430 x 430 mm. A field of 430 x 400 mm centred 10 mm to
  // the right: 21 CFR 1020.31 at SID 1000 mm allows 30 mm per axis, 40 mm summed (within),
  // and the centre within 2 % of SID = 20 mm (10 mm = 1 %).
  FieldMeasurement f = MakeField(1075 + 50, 1075, 1000, 1075, 0.0, 2150, 2150);
  // Height 2150 px reaches the image border: make top and bottom visible at the border.
  ReceptorMeasurement r = ComputeReceptor(f, 2150, 2150, std::array<double, 2>{0.2, 0.2},
                                          std::array<double, 2>{430.0, 430.0}, 1000.0);
  REQUIRE(r.field_mm);
  CHECK((*r.field_mm)[0] == doctest::Approx(430.0));
  CHECK((*r.field_mm)[1] == doctest::Approx(400.0));
  REQUIRE(r.centre_offset_mm);
  CHECK(*r.centre_offset_mm == doctest::Approx(10.0));
  CHECK(*r.centre_offset_pct_sid == doctest::Approx(1.0));
  REQUIRE(r.pbl_within_limits);
  CHECK(*r.pbl_within_limits);
  CHECK(*r.size_difference_pct_sid == doctest::Approx(3.0));
  CHECK(*r.field_fraction_of_image == doctest::Approx(400.0 / 430.0));
}

TEST_CASE("DeclaredEdgesAreComparedWithinTwoPercentOfSid") {
  // Field edges at x = 100.5 .. 500.5, y = 80.5 .. 380.5 (0.5 mm pixels). DICOM edge numbers
  // are 1-based pixel columns / rows; the edge is taken at the centre of the named pixel.
  FieldMeasurement f = MakeField(300.5, 230.5, 200, 150, 0.0, 800, 600);
  RadiographHeader h;
  h.collimator_edges = DeclaredEdges{101, 501, 81, 381};  // exactly the detected edges
  auto d = CompareDeclared(f, h, std::array<double, 2>{0.5, 0.5}, 1000.0);
  REQUIRE(d);
  CHECK(d->source == "collimator");
  REQUIRE(d->edges.size() == 4);
  for (const auto& e : d->edges) CHECK(e.deviation_mm == doctest::Approx(0.0));

  // Declared left edge 42 px = 21 mm further out: the detected field is 21 mm smaller there.
  // 21 CFR 1020.31: 2 % of SID = 20 mm at SID 1000 (beyond), 36 mm at SID 1800 (within).
  h.collimator_edges = DeclaredEdges{59, 501, 81, 381};
  d = CompareDeclared(f, h, std::array<double, 2>{0.5, 0.5}, 1000.0);
  CHECK(d->edges[0].side == Side::kLeft);
  CHECK(d->edges[0].deviation_mm == doctest::Approx(-21.0));
  CHECK(*d->edges[0].deviation_pct_sid == doctest::Approx(-2.1));
  CHECK(d->edges[0].beyond_limit);
  CHECK_FALSE(d->edges[1].beyond_limit);
  d = CompareDeclared(f, h, std::array<double, 2>{0.5, 0.5}, 1800.0);
  CHECK_FALSE(d->edges[0].beyond_limit);

  // Shutters are used when no collimator edges are declared; nothing declared gives nothing.
  RadiographHeader s;
  s.shutter_edges = DeclaredEdges{101, 511, 81, 381};  // right edge 10 px = 5 mm out
  d = CompareDeclared(f, s, std::array<double, 2>{0.5, 0.5}, 1000.0);
  CHECK(d->source == "shutter");
  CHECK(d->edges[1].deviation_mm == doctest::Approx(-5.0));
  CHECK_FALSE(CompareDeclared(f, RadiographHeader{}, std::array<double, 2>{0.5, 0.5}, 1000.0));
}

TEST_CASE("VerdictNamesTheRuleAndGivesReasonsInPlainWords") {
  auto rules = LoadRules({});
  REQUIRE(rules.ok());
  const Rule& hand = (*rules)->Find("HAND", "PA");
  ImageRecord r;
  r.field = MakeField(400, 300, 150, 110, 0.0, 800, 600);
  r.anatomy = BoxAnatomy(270, 530, 200, 400, 0.0);  // 260 x 200 px in a 300 x 220 px field
  r.excess = ComputeExcess(*r.field, *r.anatomy, std::array<double, 2>{0.2, 0.2}, 1.1, hand.margin_mm);
  Verdict v = Decide(r, hand);
  CHECK(v.rule == "hand and wrist");
  CHECK(v.outcome == "acceptable");

  // A wide field: the anatomy covers a quarter of it.
  r.anatomy = BoxAnatomy(325, 475, 245, 355, 0.0);
  r.excess = ComputeExcess(*r.field, *r.anatomy, std::array<double, 2>{0.2, 0.2}, 1.1, hand.margin_mm);
  RadiographHeader h;
  h.area_dose_product_dgy_cm2 = 0.5;
  r.dose = ComputeDose(h, r.excess->fraction_at_0mm);
  v = Decide(r, hand);
  CHECK(v.outcome == "needs review");
  REQUIRE_FALSE(v.reasons.empty());
  CHECK(v.reasons[0].find("of the exposed field lies outside the anatomy plus a 5 mm margin") !=
        std::string::npos);
  bool dose_caution = false;
  for (const auto& reason : v.reasons) {
    dose_caution = dose_caution || reason.find("not a patient dose record") != std::string::npos;
  }
  CHECK(dose_caution);

  // Anatomy at two blade edges, long axis unknown: for a hand both are likely cut-offs; for a
  // chest the trunk is expected to run through every edge (rules "continues_through"; common
  // practice, no single source).
  r.anatomy = BoxAnatomy(250, 550, 190, 410, 0.0);
  r.anatomy->at_blade_sides = {Side::kLeft, Side::kTop};
  r.anatomy->clipped_sides = r.anatomy->at_blade_sides;
  r.excess = ComputeExcess(*r.field, *r.anatomy, std::array<double, 2>{0.2, 0.2}, 1.1, hand.margin_mm);
  v = Decide(r, hand);
  CHECK(v.outcome == "needs review");
  CHECK(v.reasons[0].find("runs into the left and top blade edges") != std::string::npos);
  CHECK(Decide(r, (*rules)->Find("CHEST", "PA")).outcome == "acceptable");

  // No field, no anatomy: not assessable.
  ImageRecord empty;
  CHECK(Decide(empty, hand).outcome == "not assessable");
  r.anatomy = AnatomyMeasurement{};
  CHECK(Decide(r, hand).outcome == "not assessable");
}

TEST_CASE("MissingBordersNeedReviewWhenTheRuleRequiresThem") {
  auto rules = LoadRules({});
  REQUIRE(rules.ok());
  ImageRecord r;
  r.field = MakeField(700, 300, 200, 110, 0.0, 800, 600);  // runs off the right side
  r.anatomy = BoxAnatomy(560, 760, 200, 400, 0.0);
  r.excess = ComputeExcess(*r.field, *r.anatomy, std::array<double, 2>{0.2, 0.2}, 1.1, 10.0);
  Verdict v = Decide(r, (*rules)->default_rule());
  CHECK(v.outcome == "needs review");
  CHECK(v.reasons[0].find("no collimation border on the right side") != std::string::npos);
  Rule lenient = (*rules)->default_rule();
  lenient.require_all_borders = false;
  CHECK(Decide(r, lenient).outcome == "not assessable");
}
