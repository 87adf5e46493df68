// Header of a synthetic radiograph: identity (fictional), geometry, receptor, declared
// collimation, dose. Dose follows IAEA TRS-457: KAP = air kerma x beam area, the same in any
// plane across the beam; here taken at the detector plane, free in air.
#include <cmath>
#include <cstdio>

#include "synth/model.h"
#include "synth/scenario_internal.h"
#include "synth/synth_internal.h"

namespace beamtrim::synth_internal {

std::string MakeUid(uint64_t seed, uint64_t index, uint64_t stream) {
  // 2.25 root followed by a 128-bit integer in decimal (ISO/IEC 9834-8 UUID-derived form).
  unsigned __int128 v = (static_cast<unsigned __int128>(MixSeed(seed, index, stream)) << 64) |
                        MixSeed(seed ^ 0x5DEECE66Dull, index, stream + 101);
  v >>= 6;  // 122 random bits, as in a version-4 UUID
  std::string digits;
  do {
    digits.insert(digits.begin(), static_cast<char>('0' + static_cast<int>(v % 10)));
    v /= 10;
  } while (v != 0);
  return "2.25." + digits;
}

std::string ImageName(const SynthScenario& sc) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "synth-%05d", sc.index);
  return buf;
}

namespace {

// DICOM edge numbers of a declared rectangle: 1-based column/row of the pixel containing the
// edge, the scenario's miscalibration added outwards.
DeclaredEdges DeclaredRect(const SynthScenario& sc) {
  FieldGeometry g = ComputeFieldGeometry(sc);
  double x0 = 1e300, x1 = -1e300, y0 = 1e300, y1 = -1e300;
  for (const Point2d& q : g.corners_px) {
    x0 = std::min(x0, q.x); x1 = std::max(x1, q.x);
    y0 = std::min(y0, q.y); y1 = std::max(y1, q.y);
  }
  const auto& off = sc.declared == "collimator" ? sc.declared_offset_mm
                                                : std::array<double, 4>{0, 0, 0, 0};
  const double p = sc.pixel_mm;
  auto col = [](double x) { return std::floor(x) + 1.0; };
  DeclaredEdges e;
  e.left = col(x0 - off[0] / p);
  e.right = col(x1 + off[1] / p);
  e.upper = col(y0 - off[2] / p);
  e.lower = col(y1 + off[3] / p);
  return e;
}

}  // namespace

RadiographHeader BuildHeader(const SynthScenario& sc) {
  RadiographHeader h;
  const PixelWindow w = WindowOf(sc);
  const bool raw = sc.output == SynthOutput::kRaw;
  h.sop_instance_uid = MakeUid(sc.seed, sc.index, 11);
  h.study_instance_uid = MakeUid(sc.seed, sc.index, 12);
  h.series_instance_uid = MakeUid(sc.seed, sc.index, 13);
  char buf[64];
  std::snprintf(buf, sizeof buf, "SYNACC%07d", sc.index + 1);
  h.accession_number = buf;
  h.transfer_syntax_uid = TransferSyntaxUid(sc.syntax);
  // Storage SOP classes from DICOM PS3.4 Annex B.
  if (sc.cr) {
    h.modality = "CR";
    h.sop_class_uid = "1.2.840.10008.5.1.4.1.1.1";
  } else {
    h.modality = "DX";
    h.sop_class_uid = raw ? "1.2.840.10008.5.1.4.1.1.1.1.1" : "1.2.840.10008.5.1.4.1.1.1.1";
  }
  h.presentation_intent_type = raw ? "FOR PROCESSING" : "FOR PRESENTATION";
  h.photometric_interpretation = sc.monochrome1 ? "MONOCHROME1" : "MONOCHROME2";
  h.pixel_intensity_relationship = raw ? "LIN" : "LOG";
  // +1: larger stored value = more X-ray intensity (PS3.3 C.8.11.3.1.2). Processed
  // MONOCHROME2 stores bone (little radiation) bright, so its sign is -1.
  h.pixel_intensity_relationship_sign = (raw || sc.monochrome1) ? 1 : -1;
  h.rows = w.h;
  h.columns = w.w;
  h.bits_allocated = sc.bits_stored <= 8 ? 8 : 16;
  h.bits_stored = sc.bits_stored;
  h.high_bit = sc.bits_stored - 1;
  h.pixel_representation = sc.signed_pixels ? 1 : 0;
  h.rescale_slope = sc.rescale_slope;
  h.rescale_intercept = sc.rescale_intercept;

  const double p = sc.pixel_mm, m = Magnification(sc);
  h.imager_pixel_spacing = std::array<double, 2>{p, p};
  if (!sc.cr && !raw) {
    h.pixel_spacing = std::array<double, 2>{p / m, p / m};
    h.pixel_spacing_calibration_type = "GEOMETRY";
  }
  h.estimated_magnification = std::round(m * 10000.0) / 10000.0;
  h.distance_source_to_detector_mm = sc.sid_mm;
  h.distance_source_to_patient_mm = sc.source_patient_mm;
  h.detector_active_dimensions_mm = std::array<double, 2>{w.receptor_h * p, w.receptor_w * p};
  h.field_of_view_origin = std::array<double, 2>{static_cast<double>(w.y0), static_cast<double>(w.x0)};
  h.field_of_view_dimensions_mm = std::array<double, 2>{w.receptor_h * p, w.receptor_w * p};
  h.field_of_view_rotation_deg = 0.0;
  h.field_of_view_horizontal_flip = "NO";

  if (sc.declared == "collimator") {
    h.collimator_shape = "RECTANGULAR";
    h.collimator_edges = DeclaredRect(sc);
  } else if (sc.declared == "shutter") {
    h.shutter_shape = "RECTANGULAR";
    h.shutter_edges = DeclaredRect(sc);
  }

  // Dose: detector-plane kerma x unclipped beam area. 1 dGy cm2 = 100 mGy cm2.
  double kerma_mgy = DetectorKermaUgy(sc) / 1000.0;
  double area_cm2 = UnclippedFieldAreaMm2(sc) / 100.0;
  h.area_dose_product_dgy_cm2 = kerma_mgy * area_cm2 / 100.0;
  // Entrance air kerma at the skin with a backscatter factor of ~1.35 (from memory).
  double skin = sc.source_patient_mm - 100.0;
  h.entrance_dose_mgy = kerma_mgy * (sc.sid_mm / skin) * (sc.sid_mm / skin) * 1.35;
  h.kvp = sc.kvp;
  h.exposure_uas = sc.mas * 1000.0;
  h.target_exposure_index = sc.target_exposure_index;

  h.operators_name = sc.operator_code;
  h.station_name = sc.station;
  h.institution_name = sc.institution;
  h.manufacturer = "beamtrim synthetic";
  h.body_part_examined = SynthBodyPartName(sc.body_part);
  h.view_position = sc.view;
  h.protocol_name = sc.protocol;
  h.study_description = "SYNTHETIC " + sc.protocol;
  h.study_date = sc.study_date;
  h.acquisition_date = sc.study_date;
  h.content_date = sc.study_date;
  return h;
}

}  // namespace beamtrim::synth_internal
