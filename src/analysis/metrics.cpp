// The metrics step of the pipeline: anatomy, excess, receptor, declared, dose and verdict.
#include <exception>

#include "beamtrim/anatomy.h"
#include "beamtrim/metrics.h"
#include "beamtrim/record.h"
#include "beamtrim/rules.h"

namespace beamtrim {
namespace {

std::optional<std::array<double, 2>> SpacingOf(const Radiograph& g, const ImageRecord& r) {
  if (r.pixel_spacing_mm) return r.pixel_spacing_mm;
  // Imager Pixel Spacing is at the detector plane by definition (PS3.3); a bare Pixel Spacing
  // is used only when no calibration type says it was scaled to the patient.
  if (g.header.imager_pixel_spacing) return g.header.imager_pixel_spacing;
  if (g.header.pixel_spacing && g.header.pixel_spacing_calibration_type.empty()) {
    return g.header.pixel_spacing;
  }
  return std::nullopt;
}

std::optional<double> MagnificationOf(const Radiograph& g, const ImageRecord& r) {
  if (r.context.magnification) return r.context.magnification;
  const RadiographHeader& h = g.header;
  if (h.distance_source_to_detector_mm && h.distance_source_to_patient_mm &&
      *h.distance_source_to_patient_mm > 0.0) {
    return *h.distance_source_to_detector_mm / *h.distance_source_to_patient_mm;
  }
  return h.estimated_magnification;
}

}  // namespace

void ComputeMetrics(const Radiograph& radiograph, const FieldMeasurement& field,
                    const RuleSet& rules, ImageRecord* record) {
  const RadiographHeader& h = radiograph.header;
  auto spacing = SpacingOf(radiograph, *record);
  auto magnification = MagnificationOf(radiograph, *record);
  std::optional<double> sid = record->context.sid_mm ? record->context.sid_mm
                                                     : h.distance_source_to_detector_mm;
  const std::string& part = record->context.body_part.empty() ? h.body_part_examined
                                                              : record->context.body_part;
  const std::string& view = record->context.view.empty() ? h.view_position : record->context.view;
  const Rule& rule = rules.Find(part, view);

  AnatomyContext context{spacing, radiograph.linear};
  record->anatomy = FindAnatomy(radiograph.pixels, field, context, {}, &record->notes);
  AnatomyMeasurement& a = *record->anatomy;
  a.clipped_sides = CutOffSides(a.at_blade_sides, a.ends, a.continuing_end, rule);
  record->excess = ComputeExcess(field, *record->anatomy, spacing, magnification, rule.margin_mm);
  record->receptor = ComputeReceptor(field, radiograph.pixels.height(), radiograph.pixels.width(),
                                     spacing, h.detector_active_dimensions_mm, sid);
  record->declared = CompareDeclared(field, h, spacing, sid);
  record->dose = ComputeDose(h, record->excess->fraction_at_0mm);
  if (record->dose->kap_dgy_cm2 || record->dose->deviation_index) {
    record->notes.push_back(
        "dose figures are estimates for quality improvement, not patient dose records");
  }
  if (!record->field) record->field = field;
  record->verdict = Decide(*record, rule);
}

}  // namespace beamtrim
