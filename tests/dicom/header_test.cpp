// Derived header quantities: spacing precedence, magnification, study month.
#include <doctest/doctest.h>

#include "beamtrim/dicom.h"

using namespace beamtrim;

TEST_CASE("ImagerPixelSpacingWinsOverPixelSpacing") {
  // DICOM PS3.3 DX Detector module: Imager Pixel Spacing is at the detector plane.
  RadiographHeader h;
  h.imager_pixel_spacing = std::array<double, 2>{0.15, 0.16};
  h.pixel_spacing = std::array<double, 2>{0.1, 0.1};
  h.pixel_spacing_calibration_type = "GEOMETRY";
  auto s = h.DetectorSpacing();
  REQUIRE(s.has_value());
  CHECK((*s)[0] == doctest::Approx(0.15));
  CHECK((*s)[1] == doctest::Approx(0.16));
}

TEST_CASE("CalibratedPixelSpacingIsScaledBackByMagnification") {
  // Object-plane spacing w/M back to the detector: w = spacing x M, M = SID / SOD
  // (Bushberg et al., magnification). 1200 / 1000 = 1.2; 0.125 x 1.2 = 0.15.
  RadiographHeader h;
  h.pixel_spacing = std::array<double, 2>{0.125, 0.125};
  h.pixel_spacing_calibration_type = "GEOMETRY";
  h.distance_source_to_detector_mm = 1200.0;
  h.distance_source_to_patient_mm = 1000.0;
  REQUIRE(h.Magnification().has_value());
  CHECK(*h.Magnification() == doctest::Approx(1.2));
  auto s = h.DetectorSpacing();
  REQUIRE(s.has_value());
  CHECK((*s)[0] == doctest::Approx(0.15));

  h.distance_source_to_patient_mm.reset();  // falls back to the estimated factor
  h.estimated_magnification = 1.1;
  CHECK(*h.Magnification() == doctest::Approx(1.1));
  CHECK((*h.DetectorSpacing())[1] == doctest::Approx(0.1375));

  h.estimated_magnification.reset();  // calibrated but no magnification: unknown
  CHECK_FALSE(h.DetectorSpacing().has_value());
}

TEST_CASE("UncalibratedPixelSpacingIsTakenAsDetectorSpacing") {
  RadiographHeader h;
  h.pixel_spacing = std::array<double, 2>{0.2, 0.2};
  REQUIRE(h.DetectorSpacing().has_value());
  CHECK((*h.DetectorSpacing())[0] == doctest::Approx(0.2));
  RadiographHeader none;
  CHECK_FALSE(none.DetectorSpacing().has_value());
  CHECK_FALSE(none.Magnification().has_value());
}

TEST_CASE("ImpossibleGeometryGivesNoMagnification") {
  // SOD larger than SID or zero cannot come from a point source (M >= 1).
  RadiographHeader h;
  h.distance_source_to_detector_mm = 1000.0;
  h.distance_source_to_patient_mm = 1200.0;
  CHECK_FALSE(h.Magnification().has_value());
  h.distance_source_to_patient_mm = 0.0;
  CHECK_FALSE(h.Magnification().has_value());
}

TEST_CASE("StudyMonthUsesStudyThenAcquisitionThenContentDate") {
  // DA format YYYYMMDD (PS3.5 6.2); ACR-NEMA YYYY.MM.DD also seen in archives.
  RadiographHeader h;
  CHECK(h.StudyMonth().empty());
  h.content_date = "20250302";
  CHECK(h.StudyMonth() == "2025-03");
  h.acquisition_date = "2024.11.30";
  CHECK(h.StudyMonth() == "2024-11");
  h.study_date = "20230715";
  CHECK(h.StudyMonth() == "2023-07");
  h.study_date = "20231315";  // month 13 is not a date: next source
  CHECK(h.StudyMonth() == "2024-11");
}
