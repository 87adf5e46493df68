// Anatomy inside the exposed field: separates direct exposure (the beam reaching the detector
// without passing through the patient) from the patient, leaves out lead markers and shields,
// and gives the anatomy's convex hull and its bounding box along the field axes (method in
// docs/metrics.md). FindAnatomy is thread-safe and re-entrant; results are value types.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/field.h"
#include "beamtrim/image.h"
#include "beamtrim/metrics.h"

namespace beamtrim {

struct AnatomyOptions {
  // Pixel size of the working image used for segmentation, mm (detector plane).
  double working_pixel_mm = 1.0;
  // Refine the four box sides on the full-resolution pixels.
  bool refine = true;
};

struct AnatomyContext {
  std::optional<std::array<double, 2>> spacing_mm;  // [row, column]; nominal 0.15 mm if absent
  bool linear = false;  // pixel values proportional to exposure (taken to the log domain)
};

// Fills found, box_px, hull_px, area_mm2, at_blade_sides, ends and continuing_end; without a
// rule, clipped_sides lists every edge of at_blade_sides (ComputeMetrics then keeps only the
// cut-offs under the exam's rule, CutOffSides in rules.h). Sides that are not visible are never
// reported at the blade. `notes` (optional) receives plain-language remarks.
AnatomyMeasurement FindAnatomy(const Image& image, const FieldMeasurement& field,
                               const AnatomyContext& context, const AnatomyOptions& options = {},
                               std::vector<std::string>* notes = nullptr);

}  // namespace beamtrim
