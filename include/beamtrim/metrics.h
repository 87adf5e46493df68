// Per-image collimation metrics: anatomy inside the field, excess exposed area, clipping,
// receptor, declared-vs-delivered and dose. All lengths at the detector plane unless a name
// says "patient". Value types; the functions that fill them are thread-safe.
// (Computed in src/analysis; the rules that turn them into a verdict are in rules.h.)
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/field.h"
#include "beamtrim/geometry.h"

namespace beamtrim {

struct AnatomyMeasurement {
  std::optional<std::array<Point2d, 4>> box_px;  // oriented along the field axes, clockwise
  Polygon hull_px;                               // convex hull of the anatomy
  std::optional<double> area_mm2;                // anatomy area inside the field
  std::vector<Side> clipped_sides;               // anatomy runs into this blade edge
  bool found = false;
};

struct ExcessMeasurement {
  std::optional<double> area_mm2;             // field area outside the anatomy box, 0 mm margin
  std::optional<double> area_patient_mm2;     // the same at the patient plane (/ M^2)
  std::optional<double> fraction_at_0mm;      // area / field area
  std::optional<double> fraction_at_margin;   // with the rule's margin added to the box
  double margin_mm = 0.0;
  // How far each blade could have moved in, mm; empty when the side is not assessable.
  std::array<std::optional<double>, 4> per_side_mm;
  std::array<std::optional<double>, 4> per_side_patient_mm;
};

struct ReceptorMeasurement {
  std::optional<std::array<double, 2>> active_mm;  // detector active dimensions, [rows, cols]
  std::optional<std::array<double, 2>> image_mm;   // image extent at the detector plane
  std::optional<std::array<double, 2>> field_mm;   // field length and width (field axes)
  std::optional<double> field_fraction_of_image;   // field area / image area
  std::array<bool, 4> assessable{};                // per side: blade visible in the image
  std::optional<double> centre_offset_mm;          // field centre vs image centre
  std::optional<double> centre_offset_pct_sid;
  std::optional<double> size_difference_pct_sid;   // sum of |length| and |width| differences
  std::optional<bool> pbl_within_limits;           // 3 % / 4 % of SID (21 CFR 1020.31)
};

struct DeclaredEdgeDeviation {
  Side side = Side::kLeft;
  double deviation_mm = 0.0;   // detected minus declared, outward positive
  std::optional<double> deviation_pct_sid;
  bool beyond_limit = false;   // |deviation| > 2 % of SID
};

struct DeclaredComparison {
  std::string source;  // "collimator" or "shutter"; empty when nothing is declared
  std::vector<DeclaredEdgeDeviation> edges;
};

struct DoseMeasurement {
  std::optional<double> kap_dgy_cm2;            // from the header
  std::optional<double> avoidable_kap_dgy_cm2;  // KAP x excess fraction (uniform field)
  std::optional<double> exposure_index;
  std::optional<double> target_exposure_index;
  std::optional<double> deviation_index;        // from the header or 10 log10(EI/EI_T)
  bool deviation_index_computed = false;
  std::string deviation_index_range;            // TG-116 wording
};

struct Verdict {
  std::string outcome;               // "acceptable", "needs review", "not assessable"
  std::string rule;                  // which rule applied (body part / view)
  std::vector<std::string> reasons;  // plain words
};

}  // namespace beamtrim
