// Shared geometry of the synthetic model: the field frame (central ray, rotation, blade
// edges), receptor/image pixel mapping, and the derived second exposure of a double-exposed
// plate. Pure functions on value types; thread-safe.
#pragma once

#include <array>
#include <cmath>

#include "beamtrim/geometry.h"
#include "beamtrim/synth.h"

namespace beamtrim::synth_internal {

inline constexpr double kPi = 3.14159265358979323846;

// Field axes: u along the field's "horizontal" axis, rotated clockwise on screen (y down) by
// rotation_deg from the image x axis; v perpendicular, pointing down-ish.
struct FieldFrame {
  double ox = 0, oy = 0, c = 1, s = 0;
  explicit FieldFrame(const SynthScenario& sc)
      : ox(sc.ray_x_mm), oy(sc.ray_y_mm),
        c(std::cos(sc.rotation_deg * kPi / 180.0)), s(std::sin(sc.rotation_deg * kPi / 180.0)) {}
  Point2d ToField(double x, double y) const {
    double dx = x - ox, dy = y - oy;
    return {dx * c + dy * s, -dx * s + dy * c};
  }
  Point2d FromField(double u, double v) const { return {ox + u * c - v * s, oy + u * s + v * c}; }
};

// Signed distance (mm) from a detector point to each blade edge, positive inside the field.
inline std::array<double, 4> InsideDistances(const SynthScenario& sc, const FieldFrame& f,
                                             double x, double y) {
  Point2d uv = f.ToField(x, y);
  return {uv.x + sc.edge_mm[0], sc.edge_mm[1] - uv.x, uv.y + sc.edge_mm[2], sc.edge_mm[3] - uv.y};
}

// Receptor pixel grid size and the kept (cropped) window in receptor pixels.
struct PixelWindow {
  int receptor_w = 0, receptor_h = 0;
  int x0 = 0, y0 = 0, w = 0, h = 0;  // image = receptor[x0, x0+w) x [y0, y0+h)
};
PixelWindow WindowOf(const SynthScenario& sc);
// The part of the kept image not blanked electronically: [x0, y0, x1, y1] in image pixels.
std::array<double, 4> UnmaskedRectPx(const SynthScenario& sc, const PixelWindow& w);

// Detector mm -> image pixel coordinates (continuous, (0,0) top-left corner of the image).
inline Point2d MmToPx(const SynthScenario& sc, const PixelWindow& w, Point2d mm) {
  return {mm.x / sc.pixel_mm - w.x0, mm.y / sc.pixel_mm - w.y0};
}

// Magnification at the patient plane, M = SID / SOD.
inline double Magnification(const SynthScenario& sc) { return sc.sid_mm / sc.source_patient_mm; }

// The second field and anatomy of a double exposure: the other half of the plate.
SynthScenario SecondExposure(const SynthScenario& sc);

// Free-in-air kerma at the detector on the central ray, uGy (inverse square from 1 m).
inline double DetectorKermaUgy(const SynthScenario& sc) {
  return sc.tube_output_ugy_per_mas_at_1m * sc.mas * (1000.0 / sc.sid_mm) * (1000.0 / sc.sid_mm);
}

}  // namespace beamtrim::synth_internal
