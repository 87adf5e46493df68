// Field detection: the region of a radiograph that the X-ray beam actually exposed, bounded by
// the shadows of the collimator blades or by the image border where a blade lies outside the
// receptor. The method (docs/method.md) searches on a reduced working resolution and refines
// each blade edge at full resolution to sub-pixel. DetectField is thread-safe and re-entrant;
// results are value types owned by the caller.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/geometry.h"
#include "beamtrim/image.h"

namespace beamtrim {

// Sides are named in the field's own frame: "left" is the blade whose outward normal points
// most towards -x (columns decreasing), "top" towards -y (rows decreasing).
enum class Side { kLeft = 0, kRight = 1, kTop = 2, kBottom = 3 };
inline constexpr std::array<Side, 4> kAllSides = {Side::kLeft, Side::kRight, Side::kTop,
                                                  Side::kBottom};
const char* SideName(Side side);

// Where the edge of the field is placed across a blade shadow.
enum class EdgeDefinition {
  kHalfTransition,  // 50 % point between the blocked plateau and the open-field level
  kQuarterMaximum,  // 21 CFR 1020.30(b): exposure one fourth of the maximum (linear images)
};
const char* EdgeDefinitionName(EdgeDefinition definition);

struct SideMeasurement {
  Side side = Side::kLeft;
  bool visible = false;             // a blade shadow was found on this side
  double confidence = 0.0;          // 0..1, for the visibility decision
  std::optional<Segment> line_px;   // the fitted blade edge, clipped to the image
  // Why the side is not visible or not assessable, in plain words (empty when visible).
  std::string reason;
  // Edge contrast across the shadow (open level / blocked level), 0 when not visible.
  double contrast_ratio = 0.0;
  // Penumbra width (10-90 %) measured across the edge, in pixels, when visible.
  std::optional<double> penumbra_px;
};

struct FieldMeasurement {
  Polygon polygon_px;          // exposed field clipped to the image, clockwise
  double area_px = 0.0;        // area of polygon_px in pixels
  std::optional<double> area_mm2;  // at the detector plane, when the spacing is known
  double rotation_deg = 0.0;   // field rotation, -45..45, positive clockwise on screen
  std::array<SideMeasurement, 4> sides;  // indexed by Side
  bool open = false;           // no collimation visible on any side
  bool blanked = false;        // outside of the field electronically set to a constant
  bool cropped = false;        // image cut down after exposure on one or more sides
  std::vector<Side> blanked_or_cropped_sides;  // sides not assessable for those reasons
  bool double_exposure = false;  // more than one exposed field found on the plate
  double confidence = 0.0;     // 0..1 for the whole field
  EdgeDefinition edge_definition = EdgeDefinition::kHalfTransition;
  std::vector<std::string> notes;

  const SideMeasurement& side(Side s) const { return sides[static_cast<int>(s)]; }
  SideMeasurement& side(Side s) { return sides[static_cast<int>(s)]; }
};

struct FieldOptions {
  // Edge placement. kQuarterMaximum is used only when the image is linear; otherwise the
  // detector falls back to kHalfTransition and says so in notes.
  EdgeDefinition edge_definition = EdgeDefinition::kHalfTransition;
  // Target pixel size of the working image for the coarse search, in mm (or in pixels of
  // about 1/8 of the longer side when the spacing is unknown).
  double working_pixel_mm = 2.0;
  // Look for a second exposed field on the plate (computed radiography double exposure).
  bool check_double_exposure = true;
};

// What the detector may know about the image besides its pixels.
struct FieldContext {
  std::optional<std::array<double, 2>> spacing_mm;  // [row, column] at the detector plane
  bool linear = false;  // pixel values proportional to exposure (raw, FOR PROCESSING)
  // Extent of the receptor that was exposed, [rows, columns] in mm at the detector plane:
  // Field of View Dimension(s) (0018,1149) when present, else Detector Active Dimension(s)
  // (0018,7026). An image clearly smaller than this was cropped after the exposure, so a
  // field reaching its border may have been cut there rather than by a blade.
  std::optional<std::array<double, 2>> receptor_mm;
};

struct RadiographHeader;  // dicom.h
// The context the header gives: detector-plane spacing and receptor extent.
FieldContext FieldContextFromHeader(const RadiographHeader& header, bool linear);

FieldMeasurement DetectField(const Image& image, const FieldContext& context,
                             const FieldOptions& options = {});

}  // namespace beamtrim
