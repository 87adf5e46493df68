// Physics of the synthetic radiographs checked against handbook formulas.
// All images here are synthetic ground truth made by the generator under test.
#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "beamtrim/synth.h"
#include "synth/model.h"
#include "synth/render.h"

using namespace beamtrim;

namespace {

// A bare beam: no patient, marker, scatter, heel, off-focus or noise; raw 16-bit output.
SynthScenario BareBeam(double pixel_mm, double receptor_mm) {
  SynthOptions o;
  o.situation = SynthSituation::kTypical;
  o.output = SynthOutput::kRaw;
  o.syntax = TransferSyntax::kExplicitLittle;
  o.noise = false;
  SynthScenario sc = RandomScenario(5, 0, o);
  sc.pixel_mm = pixel_mm;
  sc.receptor_width_mm = sc.receptor_height_mm = receptor_mm;
  sc.ray_x_mm = sc.ray_y_mm = receptor_mm / 2;
  sc.anatomy_x_mm = sc.anatomy_y_mm = 1e6;  // patient far off the receptor
  sc.marker = sc.shield = sc.implant = sc.double_exposure = false;
  sc.blank = {};
  sc.crop = {};
  sc.scatter_scale = 0.0;
  sc.off_focus_fraction = 0.0;
  sc.heel_strength = 0.0;
  sc.detector_blur_mm = 0.0;
  sc.rotation_deg = 0.0;
  sc.bits_stored = 16;
  sc.signed_pixels = false;
  sc.rescale_slope = 1.0;
  sc.rescale_intercept = 0.0;
  sc.noise = false;
  return sc;
}

// Position (mm, continuous coordinates) where a rising profile crosses `level`.
double Crossing(const std::vector<double>& v, double level, double pixel_mm) {
  for (size_t i = 1; i < v.size(); ++i) {
    if (v[i - 1] < level && v[i] >= level) {
      double t = (level - v[i - 1]) / (v[i] - v[i - 1]);
      return (static_cast<double>(i - 1) + 0.5 + t) * pixel_mm;  // pixel centres at i + 0.5
    }
  }
  return NAN;
}

}  // namespace

TEST_CASE("GeometricPenumbraFollowsFocalSpotFormula") {
  // Bushberg et al., The Essential Physics of Medical Imaging: P = f (SID - d) / d.
  // Worked value: f = 1.2 mm, SID = 1000 mm, d = 200 mm -> P = 1.2 * 800 / 200 = 4.8 mm.
  CHECK(GeometricPenumbraMm(1.2, 1000.0, 200.0) == doctest::Approx(4.8));
  CHECK(GeometricPenumbraMm(0.6, 1800.0, 150.0) == doctest::Approx(0.6 * 1650.0 / 150.0));
}

TEST_CASE("BladeShadowIsHalfTransmittedAtTheGeometricEdgeAndSymmetric") {
  // A symmetric penumbra has its 50 % point at the geometric projection of the blade edge
  // (Bushberg et al.; trade notes). Checked for point samples and finite apertures.
  for (double aperture : {0.0, 0.1, 0.5}) {
    CHECK(synth_internal::EdgeTransmission(0.0, 4.0, aperture) == doctest::Approx(0.5));
    for (double s : {0.3, 1.0, 1.9, 2.5, 7.0}) {
      double sum = synth_internal::EdgeTransmission(s, 4.0, aperture) +
                   synth_internal::EdgeTransmission(-s, 4.0, aperture);
      CHECK(sum == doctest::Approx(1.0).epsilon(1e-12));
    }
  }
  // Outside the ramp the shadow is fully open / fully blocked.
  CHECK(synth_internal::EdgeTransmission(3.0, 4.0, 0.0) == doctest::Approx(1.0));
  CHECK(synth_internal::EdgeTransmission(-3.0, 4.0, 0.0) == doctest::Approx(0.0));
}

TEST_CASE("OffFocusShadowIsSmoothWithTheSourceWidthAsItsHalfMaximum") {
  // The shadow of an edge is the integral of the source profile across it, so its slope is the
  // profile itself: half of its peak at +-FWHM / 2 (definition of the full width at half
  // maximum), 50 % transmission at the edge, and no end to the slope (no kink to show as an
  // edge after a log transform).
  const double w = 60.0, h = 1e-4;
  auto slope = [&](double x) {
    return (synth_internal::SmoothEdgeTransmission(x + h, w) -
            synth_internal::SmoothEdgeTransmission(x - h, w)) / (2 * h);
  };
  CHECK(synth_internal::SmoothEdgeTransmission(0.0, w) == doctest::Approx(0.5));
  CHECK(slope(0.5 * w) == doctest::Approx(0.5 * slope(0.0)).epsilon(1e-4));
  CHECK(slope(-0.5 * w) == doctest::Approx(0.5 * slope(0.0)).epsilon(1e-4));
  CHECK(slope(w) > 0.0);
}

TEST_CASE("RenderedEdgeProfileHasTheFormulaPenumbraAndItsMidpointOnTheEdge") {
  // Noiseless bare beam at 0.05 mm pixels. For a uniform focal spot the blade shadow is a
  // linear ramp of width P = f (SID - d) / d (Bushberg et al.), so its 10-90 % width is 0.8 P;
  // the 50 % point lies at the geometric edge.
  SynthScenario sc = BareBeam(0.05, 40.0);
  sc.focal_spot_mm = 1.2;
  sc.sid_mm = 1000.0;
  sc.blade_distance_lr_mm = 180.0;
  sc.edge_mm = {12.3, 12.0, 15.0, 15.0};  // left edge at 20 - 12.3 = 7.7 mm
  SynthImage img = Generate(sc);
  const int y = img.pixels.height() / 2;
  std::vector<double> row;
  for (int x = 0; x < img.pixels.width() / 2; ++x) row.push_back(img.pixels.at(x, y));
  double blocked = row[10], open = row[row.size() - 10];
  REQUIRE(open > blocked * 10);
  auto level = [&](double f) { return blocked + f * (open - blocked); };
  double x10 = Crossing(row, level(0.1), sc.pixel_mm);
  double x50 = Crossing(row, level(0.5), sc.pixel_mm);
  double x90 = Crossing(row, level(0.9), sc.pixel_mm);
  double p = GeometricPenumbraMm(1.2, 1000.0, 180.0);
  CHECK(x90 - x10 == doctest::Approx(0.8 * p).epsilon(0.02));
  CHECK(std::fabs(x50 - 7.7) < 0.01);
  CHECK(img.penumbra_mm[0] == doctest::Approx(p));
}

TEST_CASE("OpenFieldFallsOffAsInverseSquareTimesObliquity") {
  // Point source on a flat detector: relative fluence (SID / r)^2 * cos(theta) = cos^3(theta)
  // (inverse-square law with obliquity; Bushberg et al.). Heel effect switched off.
  SynthScenario sc = BareBeam(1.0, 430.0);
  sc.sid_mm = 1000.0;
  sc.edge_mm = {5000, 5000, 5000, 5000};
  SynthImage img = Generate(sc);
  double centre = img.pixels.at(215, 215);  // pixel centre 215.5 mm: 0.5 mm off the ray
  double off = img.pixels.at(415, 215);     // 200 mm off axis
  double cos_t = 1000.0 / std::hypot(1000.0, 200.0);
  double cos_c = 1000.0 / std::hypot(1000.0, 0.5 * std::sqrt(2.0));
  CHECK(off / centre == doctest::Approx(std::pow(cos_t, 3) / std::pow(cos_c, 3)).epsilon(2e-4));
}

TEST_CASE("DetectorKermaFollowsInverseSquareWithDistance") {
  // Free-in-air kerma scales as 1 / SID^2 (inverse-square law).
  SynthScenario a = BareBeam(1.0, 100.0), b = a;
  a.sid_mm = 1000.0;
  b.sid_mm = 1800.0;
  CHECK(synth_internal::DetectorKermaUgy(a) / synth_internal::DetectorKermaUgy(b) ==
        doctest::Approx(1.8 * 1.8));
}

TEST_CASE("DoseAreaProductIsKermaTimesBeamArea") {
  // IAEA TRS-457: KAP = air kerma x beam area, the same in every plane across the beam.
  // 1 dGy cm2 = 100 mGy cm2. Kerma at the detector: output(1 m) x mAs x (1000 / SID)^2.
  SynthOptions o;
  o.pixel_mm = 2.0;
  for (int i = 0; i < 12; ++i) {
    SynthScenario sc = RandomScenario(11, i, o);
    RadiographHeader h = Generate(sc).header;
    double kerma_mgy = sc.tube_output_ugy_per_mas_at_1m * sc.mas * std::pow(1000.0 / sc.sid_mm, 2) / 1000.0;
    double w = std::min(sc.edge_mm[0] + sc.edge_mm[1], 1000.0);
    double l = std::min(sc.edge_mm[2] + sc.edge_mm[3], 1000.0);
    REQUIRE(h.area_dose_product_dgy_cm2.has_value());
    CHECK(*h.area_dose_product_dgy_cm2 == doctest::Approx(kerma_mgy * (w * l / 100.0) / 100.0));
    // Same product at the patient plane: kerma x M^2, area / M^2.
    double m = sc.sid_mm / sc.source_patient_mm;
    CHECK(kerma_mgy * m * m * (w * l / 100.0 / (m * m)) / 100.0 ==
          doctest::Approx(*h.area_dose_product_dgy_cm2));
  }
}

TEST_CASE("DeviationIndexFollowsIec62494") {
  // IEC 62494-1: DI = 10 log10(EI / EI_T).
  SynthOptions o;
  o.pixel_mm = 2.0;
  for (int i = 0; i < 6; ++i) {
    RadiographHeader h = Generate(RandomScenario(21, i, o)).header;
    REQUIRE(h.exposure_index.has_value());
    REQUIRE(h.target_exposure_index.has_value());
    // EI is written as a whole number and DI to 0.01: allow both roundings.
    double tolerance = 10.0 * std::log10(1.0 + 0.5 / *h.exposure_index) + 0.0051;
    CHECK(std::fabs(*h.deviation_index -
                    10.0 * std::log10(*h.exposure_index / *h.target_exposure_index)) <= tolerance);
  }
}

TEST_CASE("ScatterReachesUnderTheBladesAndGrowsWithFieldSize") {
  // Scatter reaches under the blades, and the scatter-to-primary ratio grows with field size
  // (Bushberg et al.; trade notes).
  SynthOptions o;
  o.pixel_mm = 2.0;
  o.situation = SynthSituation::kTypical;
  o.body_part = SynthBodyPart::kAbdomen;
  SynthScenario sc = RandomScenario(3, 1, o);
  sc.marker = false;
  sc.ray_x_mm = sc.anatomy_x_mm;
  sc.ray_y_mm = sc.anatomy_y_mm;
  sc.edge_mm = {150, 150, 180, 180};
  SynthScenario small = sc;
  small.edge_mm = {40, 40, 40, 40};
  const auto w = synth_internal::WindowOf(sc);
  auto maps = synth_internal::RenderExposure(sc, synth_internal::BuildScene(sc), w.receptor_w, w.receptor_h);
  auto maps_small = synth_internal::RenderExposure(small, synth_internal::BuildScene(small), w.receptor_w, w.receptor_h);
  int cx = static_cast<int>(sc.ray_x_mm / sc.pixel_mm), cy = static_cast<int>(sc.ray_y_mm / sc.pixel_mm);
  // 15 mm outside the top blade of the large field.
  int oy = static_cast<int>((sc.ray_y_mm - 180.0 - 15.0) / sc.pixel_mm);
  REQUIRE(oy >= 0);
  CHECK(maps.scatter.at(cx, oy) > maps.primary.at(cx, oy));
  double spr_large = maps.scatter.at(cx, cy) / maps.primary.at(cx, cy);
  double spr_small = maps_small.scatter.at(cx, cy) / maps_small.primary.at(cx, cy);
  CHECK(spr_large > 1.5 * spr_small);
  // With a grid, scatter in a large abdomen field stays of the order of the primary.
  CHECK(spr_large > 0.2);
  CHECK(spr_large < 3.0);
}
