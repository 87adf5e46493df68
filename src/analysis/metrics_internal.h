// Shared helpers of the metrics code: the field's own frame and pixel-to-mm conversion.
#pragma once

#include <algorithm>
#include <array>
#include <cmath>

#include "beamtrim/field.h"
#include "beamtrim/geometry.h"

namespace beamtrim::metrics_internal {

inline constexpr double kPi = 3.14159265358979323846;

// Field axes in image pixels: u along the rotated x axis, v along the rotated y axis
// (rotation positive clockwise on screen, y down), origin at the image origin.
struct FieldFrame {
  double c = 1.0;
  double s = 0.0;
  explicit FieldFrame(double rotation_deg)
      : c(std::cos(rotation_deg * kPi / 180.0)), s(std::sin(rotation_deg * kPi / 180.0)) {}
  double U(Point2d p) const { return p.x * c + p.y * s; }
  double V(Point2d p) const { return -p.x * s + p.y * c; }
  Point2d From(double u, double v) const { return {u * c - v * s, u * s + v * c}; }
  // Outward unit normal of a side, in image pixels.
  Point2d Normal(Side side) const {
    switch (side) {
      case Side::kLeft: return {-c, -s};
      case Side::kRight: return {c, s};
      case Side::kTop: return {s, -c};
      case Side::kBottom: return {-s, c};
    }
    return {c, s};
  }
};

// Box extents along the field axes: u0, u1, v0, v1 (indexed like Side).
using BoxExtents = std::array<double, 4>;

inline std::array<Point2d, 4> BoxCorners(const FieldFrame& f, const BoxExtents& e) {
  // top-left, top-right, bottom-right, bottom-left: clockwise on screen
  return {f.From(e[0], e[2]), f.From(e[1], e[2]), f.From(e[1], e[3]), f.From(e[0], e[3])};
}

inline BoxExtents ExtentsOf(const FieldFrame& f, const Polygon& points) {
  BoxExtents e = {1e300, -1e300, 1e300, -1e300};
  for (const Point2d& p : points) {
    e[0] = std::min(e[0], f.U(p));
    e[1] = std::max(e[1], f.U(p));
    e[2] = std::min(e[2], f.V(p));
    e[3] = std::max(e[3], f.V(p));
  }
  return e;
}

// Length in mm of one pixel step along the unit direction d (spacing [row, column]).
inline double MmPerPixelAlong(const std::array<double, 2>& spacing, Point2d d) {
  return std::hypot(d.x * spacing[1], d.y * spacing[0]);
}

}  // namespace beamtrim::metrics_internal
