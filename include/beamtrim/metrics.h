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
  // Blade edges where the anatomy runs into the blade and the exam's rule does not expect the
  // body to continue (a likely cut-off; docs/method.md, "Clipping"). FindAnatomy alone, without
  // a rule, lists every edge of at_blade_sides; ComputeMetrics applies the rule.
  std::vector<Side> clipped_sides;
  std::vector<Side> at_blade_sides;               // anatomy runs into this blade edge (any exam)
  std::optional<std::array<Side, 2>> ends;        // field sides across the anatomy's long axis
  std::optional<Side> continuing_end;             // the end a limb or the neck runs through
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

class RuleSet;  // rules.h
struct Rule;
struct ImageRecord;  // record.h

// ---- The per-image step of the pipeline -----------------------------------------------------

// Fills record->anatomy, excess, receptor, declared, dose and verdict from the pixels, the
// detected field, the header and the rules. Reads record->pixel_spacing_mm and
// record->context (filled by FillRecordContext) and falls back to the header when empty.
void ComputeMetrics(const Radiograph& radiograph, const FieldMeasurement& field,
                    const RuleSet& rules, ImageRecord* record);

// ---- Building blocks (each pure and thread-safe) --------------------------------------------

// Excess exposed area: field area outside the anatomy box (and outside the box grown by
// `margin_mm`), per side how far each visible blade could have moved in. Without a spacing
// only the fractions are given; without a magnification no patient-plane values.
ExcessMeasurement ComputeExcess(const FieldMeasurement& field, const AnatomyMeasurement& anatomy,
                                const std::optional<std::array<double, 2>>& spacing_mm,
                                std::optional<double> magnification, double margin_mm);

// Field against the receptor and the image (21 CFR 1020.31 checks where the geometry allows).
ReceptorMeasurement ComputeReceptor(const FieldMeasurement& field, int rows, int columns,
                                    const std::optional<std::array<double, 2>>& spacing_mm,
                                    const std::optional<std::array<double, 2>>& active_mm,
                                    std::optional<double> sid_mm);

// Declared collimator edges (else display shutters) against the detected blade edges.
// Edge numbers are 1-based pixel columns / rows; the edge is taken at the centre of that
// pixel. Empty when nothing is declared.
std::optional<DeclaredComparison> CompareDeclared(
    const FieldMeasurement& field, const RadiographHeader& header,
    const std::optional<std::array<double, 2>>& spacing_mm, std::optional<double> sid_mm);

// KAP, avoidable KAP (KAP x excess fraction, uniform field), EI, EI_T and DI.
DoseMeasurement ComputeDose(const RadiographHeader& header, std::optional<double> excess_fraction);

// The verdict for one measured record under one rule.
Verdict Decide(const ImageRecord& record, const Rule& rule);

// ---- Published formulas and limits -----------------------------------------------------------

// IEC 62494-1:2008: DI = 10 log10(EI / EI_T). Both must be > 0.
double DeviationIndex(double exposure_index, double target_exposure_index);

// AAPM TG-116 (Shepard et al. 2009) ranges, in plain words.
std::string DeviationIndexRange(double deviation_index);

// 21 CFR 1020.31 positive beam limitation: neither the length nor the width of the x-ray field
// may differ from the receptor's by more than 3 % of SID; the sum of the two differences,
// without regard to sign, at most 4 % of SID.
struct PblCheck {
  double length_difference_mm = 0.0;  // |field length - receptor length|
  double width_difference_mm = 0.0;
  double sum_pct_sid = 0.0;
  bool within_limits = false;
};
PblCheck CheckPositiveBeamLimitation(double field_length_mm, double field_width_mm,
                                     double receptor_length_mm, double receptor_width_mm,
                                     double sid_mm);

// 21 CFR 1020.31: edge misalignment or centre offset within 2 % of SID.
bool WithinTwoPercentOfSid(double deviation_mm, double sid_mm);

// Detector-plane length to the patient plane: w / M, M = SID / source-to-patient distance.
double ToPatientPlane(double detector_mm, double magnification);

}  // namespace beamtrim
