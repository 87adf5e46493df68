// Truth records of the synthetic generator: exact geometry, clipping consistency,
// determinism, situation classes. Data are synthetic ground truth from the generator itself;
// the references are analytic rectangle areas and OpenCV's independent polygon routines.
#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include <nlohmann/json.hpp>
#include <opencv2/imgproc.hpp>

#include "beamtrim/record.h"
#include "beamtrim/synth.h"
#include "synth/model.h"
#include "synth/phantom.h"

using namespace beamtrim;

namespace {

std::vector<cv::Point2f> ToCv(const Polygon& p) {
  std::vector<cv::Point2f> out;
  for (const Point2d& q : p) out.emplace_back(static_cast<float>(q.x), static_cast<float>(q.y));
  return out;
}

SynthOptions Small(SynthSituation s = SynthSituation::kAny) {
  SynthOptions o;
  o.pixel_mm = 1.0;
  o.situation = s;
  return o;
}

}  // namespace

TEST_CASE("SameSeedAndIndexGiveTheSameImage") {
  // Determinism: the generator is seeded per image from (seed, index) only.
  SynthOptions o = Small();
  SynthImage a = Generate(RandomScenario(42, 7, o));
  SynthImage b = Generate(RandomScenario(42, 7, o));
  CHECK(a.stored.values == b.stored.values);
  CHECK(ToJsonLine(a.truth) == ToJsonLine(b.truth));
  CHECK(a.header.sop_instance_uid == b.header.sop_instance_uid);
  SynthImage c = Generate(RandomScenario(42, 8, o));
  CHECK(c.header.sop_instance_uid != a.header.sop_instance_uid);
  SynthImage d = Generate(RandomScenario(43, 7, o));
  CHECK(d.header.sop_instance_uid != a.header.sop_instance_uid);
}

TEST_CASE("UidsUseThe225RootAndFitSixtyFourCharacters") {
  // DICOM PS3.5 9.1: UIDs at most 64 characters, digits and dots; 2.25 root for UUID-derived
  // integers (ISO/IEC 9834-8).
  RadiographHeader h = Generate(RandomScenario(1, 0, Small())).header;
  for (const std::string& uid : {h.sop_instance_uid, h.study_instance_uid, h.series_instance_uid}) {
    CHECK(uid.rfind("2.25.", 0) == 0);
    CHECK(uid.size() <= 64);
    CHECK(uid.find_first_not_of("0123456789.") == std::string::npos);
    CHECK(uid[5] != '0');  // no leading zero in a component
  }
}

TEST_CASE("TruthFieldAreaEqualsTheRotatedRectangleArea") {
  // A rotated field entirely on the image: area = (left + right) x (top + bottom) / pixel^2;
  // independent check with cv::contourArea (Green's formula).
  SynthScenario sc = RandomScenario(9, 0, Small(SynthSituation::kRotated));
  sc.edge_mm = {60, 70, 50, 80};
  sc.ray_x_mm = sc.receptor_width_mm / 2;
  sc.ray_y_mm = sc.receptor_height_mm / 2;
  ImageRecord t = ComputeTruth(sc);
  REQUIRE(t.field.has_value());
  double expected_px = (60.0 + 70.0) * (50.0 + 80.0) / (sc.pixel_mm * sc.pixel_mm);
  CHECK(t.field->area_px == doctest::Approx(expected_px).epsilon(1e-9));
  CHECK(cv::contourArea(ToCv(t.field->polygon_px)) == doctest::Approx(expected_px).epsilon(1e-5));
  CHECK(*t.field->area_mm2 == doctest::Approx(130.0 * 130.0).epsilon(1e-9));
  CHECK(SignedArea(t.field->polygon_px) > 0.0);  // clockwise on screen
  for (const SideMeasurement& s : t.field->sides) CHECK(s.visible);
}

TEST_CASE("ClippedTruthFieldMatchesOpenCvConvexIntersection") {
  // Fields running off the image: the truth polygon is the field clipped to the image;
  // reference: cv::intersectConvexConvex of the unclipped field and the image rectangle.
  for (int i = 0; i < 20; ++i) {
    SynthScenario sc = RandomScenario(17, i, Small(SynthSituation::kBladeOutside));
    sc.rotation_deg = -30.0 + 3.0 * i;
    ImageRecord t = ComputeTruth(sc);
    Polygon full = TrueFieldPolygonPx(sc);
    std::vector<cv::Point2f> inter;
    Polygon image = RectPolygon(0, 0, t.columns, t.rows);
    float area = cv::intersectConvexConvex(ToCv(full), ToCv(image), inter, true);
    CHECK(t.field->area_px == doctest::Approx(area).epsilon(1e-4));
    for (const Point2d& q : t.field->polygon_px) {
      CHECK(q.x >= -1e-9);
      CHECK(q.y >= -1e-9);
      CHECK(q.x <= t.columns + 1e-9);
      CHECK(q.y <= t.rows + 1e-9);
    }
  }
}

TEST_CASE("TruthIsConsistentAcrossRandomScenarios") {
  // Internal consistency of every truth record (synthetic ground truth): box inside the field,
  // excess = field - (field and box), fractions in [0, 1], per-side values only for visible
  // sides, `open` exactly when no side is visible.
  for (int i = 0; i < 60; ++i) {
    SynthScenario sc = RandomScenario(2024, i, Small());
    ImageRecord t = ComputeTruth(sc);
    INFO("index " << i << " situation " << std::string(SynthSituationName(sc.situation)));
    REQUIRE(t.field.has_value());
    const FieldMeasurement& f = *t.field;
    CHECK(f.area_px <= static_cast<double>(t.rows) * t.columns + 1e-6);
    int visible = 0;
    for (const SideMeasurement& s : f.sides) {
      visible += s.visible;
      CHECK(s.visible == s.line_px.has_value());
      CHECK(s.visible == s.reason.empty());
    }
    CHECK(f.open == (visible == 0));
    if (!t.anatomy || !t.anatomy->found) continue;
    for (const Point2d& q : *t.anatomy->box_px) {
      // Box corners lie in the field rectangle (they may leave the image when rotated).
      Polygon full = TrueFieldPolygonPx(sc);
      CHECK(cv::pointPolygonTest(ToCv(full), cv::Point2f(static_cast<float>(q.x), static_cast<float>(q.y)), true) > -1e-2);
    }
    REQUIRE(t.excess.has_value());
    CHECK(*t.excess->area_mm2 >= 0.0);
    CHECK(*t.excess->area_mm2 <= *f.area_mm2 + 1e-6);
    CHECK(*t.excess->fraction_at_0mm >= 0.0);
    CHECK(*t.excess->fraction_at_0mm <= 1.0);
    double m = sc.sid_mm / sc.source_patient_mm;
    CHECK(*t.excess->area_patient_mm2 == doctest::Approx(*t.excess->area_mm2 / (m * m)));
    for (Side s : kAllSides) {
      int k = static_cast<int>(s);
      CHECK(t.excess->per_side_mm[k].has_value() == f.sides[k].visible);
      if (t.excess->per_side_mm[k]) {
        CHECK(*t.excess->per_side_patient_mm[k] == doctest::Approx(*t.excess->per_side_mm[k] / m));
      }
    }
    CHECK(*t.anatomy->area_mm2 <= *f.area_mm2 + 1e-6);
  }
}

TEST_CASE("AnatomyBoxMatchesTissueSampledAtPixelCentres") {
  // Independent check of the analytic box: sample the phantom's tissue thickness at every
  // pixel centre inside the field and take the extent along the field axes; it must agree
  // with the truth box within one pixel.
  SynthOptions o = Small(SynthSituation::kTypical);
  o.body_part = SynthBodyPart::kKnee;
  SynthScenario sc = RandomScenario(5, 3, o);
  sc.rotation_deg = 12.0;
  sc.anatomy_rotation_deg = 12.0;
  ImageRecord t = ComputeTruth(sc);
  REQUIRE(t.anatomy.has_value());
  REQUIRE(t.anatomy->found);
  auto scene = synth_internal::BuildScene(sc);
  synth_internal::FieldFrame f(sc);
  double u0 = 1e9, u1 = -1e9, v0 = 1e9, v1 = -1e9;
  for (int y = 0; y < t.rows; ++y) {
    for (int x = 0; x < t.columns; ++x) {
      double xm = (x + 0.5) * sc.pixel_mm, ym = (y + 0.5) * sc.pixel_mm;
      auto in = synth_internal::InsideDistances(sc, f, xm, ym);
      if (*std::min_element(in.begin(), in.end()) < 0.0) continue;
      if (scene.patient.TissueThickness(xm, ym) <= 0.0) continue;
      Point2d uv = f.ToField(xm, ym);
      u0 = std::min(u0, uv.x); u1 = std::max(u1, uv.x);
      v0 = std::min(v0, uv.y); v1 = std::max(v1, uv.y);
    }
  }
  const auto& b = *t.anatomy->box_px;
  auto uv = [&](Point2d px) { return f.ToField(px.x * sc.pixel_mm, px.y * sc.pixel_mm); };
  double tol = 1.0 * sc.pixel_mm;
  CHECK(std::fabs(uv(b[0]).x - u0) < tol);
  CHECK(std::fabs(uv(b[0]).y - v0) < tol);
  CHECK(std::fabs(uv(b[2]).x - u1) < tol);
  CHECK(std::fabs(uv(b[2]).y - v1) < tol);
}

TEST_CASE("SituationFilterGivesThatKindOfPicture") {
  for (SynthSituation s : AllSynthSituations()) {
    for (int i = 0; i < 4; ++i) {
      SynthScenario sc = RandomScenario(77, i, Small(s));
      INFO(std::string(SynthSituationName(s)) << " " << i);
      CHECK(sc.situation == s);
      ImageRecord t = ComputeTruth(sc);
      const FieldMeasurement& f = *t.field;
      switch (s) {
        case SynthSituation::kOpen: CHECK(f.open); break;
        case SynthSituation::kTypical:
        case SynthSituation::kRotated:
        case SynthSituation::kWide:
          for (const SideMeasurement& side : f.sides) CHECK(side.visible);
          break;
        case SynthSituation::kBladeOutside: {
          int hidden = 0;
          for (const SideMeasurement& side : f.sides) hidden += !side.visible;
          CHECK(hidden >= 1);
          CHECK(hidden <= 3);
          break;
        }
        case SynthSituation::kBlanked: CHECK(f.blanked); break;
        case SynthSituation::kCropped:
          CHECK(f.cropped);
          CHECK(static_cast<double>(t.rows) * t.columns * sc.pixel_mm * sc.pixel_mm <
                (*t.receptor->active_mm)[0] * (*t.receptor->active_mm)[1]);
          break;
        case SynthSituation::kDoubleExposure: CHECK(f.double_exposure); break;
        case SynthSituation::kDeclaredOffset: {
          REQUIRE(t.declared.has_value());
          double worst = 0;
          for (const auto& e : t.declared->edges) worst = std::max(worst, std::fabs(e.deviation_mm));
          CHECK(worst >= 8.0);
          break;
        }
        case SynthSituation::kSmallField: CHECK(*f.area_mm2 <= 70.0 * 70.0 + 1e-6); break;
        case SynthSituation::kTight: CHECK(!t.anatomy->at_blade_sides.empty()); break;
        default: break;
      }
    }
  }
}

TEST_CASE("TruthRecordSurvivesTheJsonRoundTrip") {
  // Tight fields put anatomy at a blade, so the anatomy's side lists and ends are exercised too.
  int with_sides = 0, with_ends = 0;
  for (SynthSituation sit : {SynthSituation::kTypical, SynthSituation::kTight}) {
    for (int i = 0; i < 6; ++i) {
      ImageRecord t = ComputeTruth(RandomScenario(3, i, Small(sit)));
      Result<ImageRecord> back = RecordFromJson(ToJson(t));
      REQUIRE(back.ok());
      CHECK(ToJsonLine(*back) == ToJsonLine(t));
      if (t.anatomy && !t.anatomy->at_blade_sides.empty()) ++with_sides;
      if (t.anatomy && t.anatomy->ends) ++with_ends;
    }
  }
  CHECK(with_sides > 0);
  CHECK(with_ends > 0);
}

TEST_CASE("ClinicIsDeterministicAndUsesFictionalIdentities") {
  SynthOptions o = Small();
  for (int i = 0; i < 20; ++i) {
    SynthScenario a = ClinicScenario(5, i, o), b = ClinicScenario(5, i, o);
    CHECK(ToJsonLine(ComputeTruth(a)) == ToJsonLine(ComputeTruth(b)));
    CHECK(a.operator_code.rfind("RT-", 0) == 0);
    CHECK(a.station.rfind("XR-ROOM-", 0) == 0);
    CHECK(a.patient_name.rfind("SYNTH^PATIENT", 0) == 0);
    CHECK(a.study_date >= "20260105");
    CHECK(a.study_date <= "20260405");
  }
}
