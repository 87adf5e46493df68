// Dose figures and the published formulas and limits they rest on.
#include <doctest/doctest.h>

#include <cmath>

#include "beamtrim/metrics.h"

using namespace beamtrim;

TEST_CASE("DeviationIndexFollowsIec62494") {
  // IEC 62494-1:2008: DI = 10 log10(EI / EI_T). Worked values: EI = 2 EI_T gives +3.01,
  // EI = EI_T / 2 gives -3.01, EI = EI_T gives 0, EI = 10^0.1 EI_T gives +1.
  CHECK(DeviationIndex(800.0, 400.0) == doctest::Approx(3.0103).epsilon(1e-4));
  CHECK(DeviationIndex(200.0, 400.0) == doctest::Approx(-3.0103).epsilon(1e-4));
  CHECK(DeviationIndex(400.0, 400.0) == doctest::Approx(0.0));
  CHECK(DeviationIndex(400.0 * std::pow(10.0, 0.1), 400.0) == doctest::Approx(1.0));
}

TEST_CASE("DeviationIndexRangesFollowTg116") {
  // AAPM TG-116 (Shepard et al., Med. Phys. 36(7), 2009), from memory: within +-0.5 on
  // target, above +1 overexposed, above +3 excessive, below -1 underexposed, below -3
  // consider a repeat.
  CHECK(DeviationIndexRange(0.0).rfind("on target", 0) == 0);
  CHECK(DeviationIndexRange(0.5).rfind("on target", 0) == 0);
  CHECK(DeviationIndexRange(-0.5).rfind("on target", 0) == 0);
  CHECK(DeviationIndexRange(0.8).rfind("slightly above", 0) == 0);
  CHECK(DeviationIndexRange(2.0).rfind("overexposed", 0) == 0);
  CHECK(DeviationIndexRange(3.5).rfind("excessive", 0) == 0);
  CHECK(DeviationIndexRange(-0.8).rfind("slightly below", 0) == 0);
  CHECK(DeviationIndexRange(-2.0).rfind("underexposed (", 0) == 0);
  CHECK(DeviationIndexRange(-3.5).find("consider a repeat") != std::string::npos);
}

TEST_CASE("DeviationIndexIsComputedOnlyWhenTheHeaderLacksIt") {
  RadiographHeader h;
  h.exposure_index = 800.0;
  h.target_exposure_index = 400.0;
  DoseMeasurement d = ComputeDose(h, std::nullopt);
  REQUIRE(d.deviation_index);
  CHECK(*d.deviation_index == doctest::Approx(3.0103).epsilon(1e-4));  // IEC 62494-1
  CHECK(d.deviation_index_computed);
  CHECK(d.deviation_index_range.rfind("excessive", 0) == 0);  // TG-116: above +3

  h.deviation_index = 1.7;  // the header's own value is kept
  d = ComputeDose(h, std::nullopt);
  CHECK(*d.deviation_index == doctest::Approx(1.7));
  CHECK_FALSE(d.deviation_index_computed);

  RadiographHeader none;
  none.exposure_index = 300.0;  // no target: no DI
  d = ComputeDose(none, std::nullopt);
  CHECK_FALSE(d.deviation_index);
  CHECK(d.deviation_index_range.empty());
}

TEST_CASE("AvoidableKapIsKapTimesExcessFraction") {
  RadiographHeader h;
  h.area_dose_product_dgy_cm2 = 1.6;
  DoseMeasurement d = ComputeDose(h, 0.25);
  REQUIRE(d.avoidable_kap_dgy_cm2);
  CHECK(*d.avoidable_kap_dgy_cm2 == doctest::Approx(0.4));
  CHECK_FALSE(ComputeDose(h, std::nullopt).avoidable_kap_dgy_cm2);
  CHECK_FALSE(ComputeDose(RadiographHeader{}, 0.25).avoidable_kap_dgy_cm2);
}

TEST_CASE("KapIsTheSameInEveryPlaneSoTheAvoidableShareIs") {
  // IAEA TRS-457 (2007): air kerma falls as 1/d^2 (inverse square) while the field area grows
  // as d^2, so KAP does not change along the beam. The excess fraction is a ratio of areas in
  // one plane, so it too is the same at the patient and at the detector (areas scale by M^2).
  const double sid = 1000.0, sod = 800.0;
  const double kerma_at_patient = 2.0;     // mGy, synthetic
  const double area_at_patient = 300.0;    // cm2, synthetic
  double m = sid / sod;                    // magnification (Bushberg et al.)
  double kerma_at_detector = kerma_at_patient * (sod / sid) * (sod / sid);
  double area_at_detector = area_at_patient * m * m;
  CHECK(kerma_at_detector * area_at_detector == doctest::Approx(kerma_at_patient * area_at_patient));
  const double excess_detector_cm2 = 90.0;
  double fraction_detector = excess_detector_cm2 / area_at_detector;
  double fraction_patient = (excess_detector_cm2 / (m * m)) / area_at_patient;
  CHECK(fraction_detector == doctest::Approx(fraction_patient));
}

TEST_CASE("PatientPlaneDividesByMagnification") {
  // M = SID / SOD; a length w at the detector is w / M at the patient (Bushberg et al.).
  CHECK(ToPatientPlane(100.0, 1000.0 / 800.0) == doctest::Approx(80.0));
  CHECK(ToPatientPlane(180.0, 1800.0 / 1500.0) == doctest::Approx(150.0));
}

TEST_CASE("TwoPercentOfSidLimit") {
  // 21 CFR 1020.31: misalignment within 2 % of SID: 20 mm at SID 1000 mm, 36 mm at 1800 mm.
  CHECK(WithinTwoPercentOfSid(20.0, 1000.0));
  CHECK_FALSE(WithinTwoPercentOfSid(20.5, 1000.0));
  CHECK(WithinTwoPercentOfSid(-19.0, 1000.0));
  CHECK(WithinTwoPercentOfSid(36.0, 1800.0));
  CHECK_FALSE(WithinTwoPercentOfSid(-36.5, 1800.0));
}

TEST_CASE("PositiveBeamLimitationLimits") {
  // 21 CFR 1020.31 (PBL): each of length and width within 3 % of SID, sum within 4 % of SID.
  // SID 1000 mm: 30 mm each, 40 mm sum. SID 1800 mm: 54 mm each, 72 mm sum.
  PblCheck ok = CheckPositiveBeamLimitation(430.0, 400.0, 430.0, 430.0, 1000.0);
  CHECK(ok.within_limits);
  CHECK(ok.width_difference_mm == doctest::Approx(30.0));
  CHECK(ok.sum_pct_sid == doctest::Approx(3.0));
  PblCheck sum = CheckPositiveBeamLimitation(410.0, 405.0, 430.0, 430.0, 1000.0);
  CHECK_FALSE(sum.within_limits);  // 20 + 25 = 45 mm > 40 mm, though each is within 30 mm
  CHECK(sum.sum_pct_sid == doctest::Approx(4.5));
  CHECK(CheckPositiveBeamLimitation(410.0, 405.0, 430.0, 430.0, 1800.0).within_limits);  // 45 <= 72
  CHECK_FALSE(CheckPositiveBeamLimitation(430.0, 370.0, 430.0, 430.0, 1000.0).within_limits);  // 60 > 30
  CHECK_FALSE(CheckPositiveBeamLimitation(430.0, 370.0, 430.0, 430.0, 1800.0).within_limits);  // 60 > 54
  CHECK(CheckPositiveBeamLimitation(480.0, 430.0, 430.0, 430.0, 1800.0).within_limits);  // +50 <= 54
}
