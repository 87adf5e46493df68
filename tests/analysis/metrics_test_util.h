// Test helpers for the metrics tests: fields and boxes with exactly known geometry
// (synthetic ground truth).
#pragma once

#include <array>
#include <algorithm>
#include <cmath>
#include <vector>

#include "beamtrim/field.h"
#include "beamtrim/geometry.h"

namespace beamtrim::testing {

inline Point2d Rotate(double u, double v, double rot_deg) {
  double r = rot_deg * 3.14159265358979323846 / 180.0;
  return {u * std::cos(r) - v * std::sin(r), u * std::sin(r) + v * std::cos(r)};
}

// Corners (clockwise on screen) of the box [u0, u1] x [v0, v1] in a frame rotated by rot_deg
// about the image origin.
inline std::array<Point2d, 4> RotatedBox(double u0, double u1, double v0, double v1,
                                         double rot_deg) {
  return {Rotate(u0, v0, rot_deg), Rotate(u1, v0, rot_deg), Rotate(u1, v1, rot_deg),
          Rotate(u0, v1, rot_deg)};
}

// A field of half-sizes (hw, hh) centred at (cx, cy), rotated, on a w x h image. A side is
// visible when its whole edge lies on the image.
inline FieldMeasurement MakeField(double cx, double cy, double hw, double hh, double rot_deg,
                                  int w, int h, double penumbra_px = 2.0) {
  FieldMeasurement f;
  f.rotation_deg = rot_deg;
  std::array<Point2d, 4> c = RotatedBox(-hw, hw, -hh, hh, rot_deg);
  for (Point2d& p : c) p = {p.x + cx, p.y + cy};
  Polygon rect(c.begin(), c.end());
  f.polygon_px = ClipToRect(rect, w, h);
  MakeClockwise(f.polygon_px);
  f.area_px = Area(f.polygon_px);
  // Side k runs between these corners (top-left, top-right, bottom-right, bottom-left).
  const int a[4] = {3, 1, 0, 2}, b[4] = {0, 2, 1, 3};
  bool any = false;
  for (Side s : kAllSides) {
    int k = static_cast<int>(s);
    SideMeasurement& m = f.sides[k];
    m.side = s;
    // The part of the edge that lies on the image (Liang-Barsky).
    Point2d p0 = c[a[k]], p1 = c[b[k]];
    double t0 = 0.0, t1 = 1.0, ddx = p1.x - p0.x, ddy = p1.y - p0.y;
    const double pp[4] = {-ddx, ddx, -ddy, ddy};
    const double qq[4] = {p0.x, w - p0.x, p0.y, h - p0.y};
    bool empty = false;
    for (int i = 0; i < 4; ++i) {
      if (std::fabs(pp[i]) < 1e-12) {
        empty = empty || qq[i] < -1e-9;
        continue;
      }
      double t = qq[i] / pp[i];
      if (pp[i] < 0) t0 = std::max(t0, t); else t1 = std::min(t1, t);
    }
    std::vector<Point2d> edge;
    if (!empty && t1 > t0) {
      edge = {{p0.x + t0 * ddx, p0.y + t0 * ddy}, {p0.x + t1 * ddx, p0.y + t1 * ddy}};
    }
    double len = edge.empty() ? 0.0 : std::hypot(edge[1].x - edge[0].x, edge[1].y - edge[0].y);
    if (len > 1.0) {
      m.visible = true;
      m.confidence = 1.0;
      m.line_px = Segment{edge[0], edge[1]};
      m.penumbra_px = penumbra_px;
      m.contrast_ratio = 10.0;
      any = true;
    } else {
      m.reason = "blade beyond the receptor";
    }
  }
  f.open = !any;
  f.confidence = 1.0;
  return f;
}

}  // namespace beamtrim::testing
