// Excess exposed area, receptor and declared-vs-delivered geometry (docs/metrics.md).
#include <algorithm>
#include <cmath>

#include "analysis/metrics_internal.h"
#include "beamtrim/metrics.h"

namespace beamtrim {
namespace {

using metrics_internal::BoxExtents;
using metrics_internal::FieldFrame;
using metrics_internal::MmPerPixelAlong;

Point2d Centroid(const Polygon& poly) {
  Point2d c{0.0, 0.0};
  for (const Point2d& p : poly) {
    c.x += p.x / poly.size();
    c.y += p.y / poly.size();
  }
  return c;
}

bool Assessable(const FieldMeasurement& field, Side side) {
  const SideMeasurement& s = field.side(side);
  const auto& hidden = field.blanked_or_cropped_sides;
  return s.visible && s.line_px && std::find(hidden.begin(), hidden.end(), side) == hidden.end();
}

// The box corners that face a side (indices into top-left, top-right, bottom-right, bottom-left).
std::array<int, 2> CornersFacing(Side side) {
  switch (side) {
    case Side::kLeft: return {0, 3};
    case Side::kRight: return {1, 2};
    case Side::kTop: return {0, 1};
    case Side::kBottom: return {2, 3};
  }
  return {0, 1};
}

// Distance, in pixels, the blade could move inwards before touching the box (never < 0).
double GapToBlade(const SideMeasurement& s, const std::array<Point2d, 4>& box, Point2d inside) {
  Line line = LineThrough(s.line_px->a, s.line_px->b);
  double sign = line.SignedDistance(inside) >= 0.0 ? 1.0 : -1.0;
  double gap = 1e300;
  for (int i : CornersFacing(s.side)) gap = std::min(gap, sign * line.SignedDistance(box[i]));
  return std::max(0.0, gap);
}

}  // namespace

double ToPatientPlane(double detector_mm, double magnification) {
  return detector_mm / magnification;
}

bool WithinTwoPercentOfSid(double deviation_mm, double sid_mm) {
  return std::fabs(deviation_mm) <= 0.02 * sid_mm;
}

PblCheck CheckPositiveBeamLimitation(double field_length_mm, double field_width_mm,
                                     double receptor_length_mm, double receptor_width_mm,
                                     double sid_mm) {
  PblCheck c;
  c.length_difference_mm = std::fabs(field_length_mm - receptor_length_mm);
  c.width_difference_mm = std::fabs(field_width_mm - receptor_width_mm);
  double sum = c.length_difference_mm + c.width_difference_mm;
  c.sum_pct_sid = sum / sid_mm * 100.0;
  c.within_limits = c.length_difference_mm <= 0.03 * sid_mm &&
                    c.width_difference_mm <= 0.03 * sid_mm && sum <= 0.04 * sid_mm;
  return c;
}

ExcessMeasurement ComputeExcess(const FieldMeasurement& field, const AnatomyMeasurement& anatomy,
                                const std::optional<std::array<double, 2>>& spacing_mm,
                                std::optional<double> magnification, double margin_mm) {
  ExcessMeasurement e;
  e.margin_mm = margin_mm;
  double field_px = Area(field.polygon_px);
  if (!anatomy.found || !anatomy.box_px || field.polygon_px.size() < 3 || field_px <= 0.0) {
    return e;
  }
  if (magnification && !(*magnification > 0.0)) magnification.reset();
  const std::array<Point2d, 4>& box = *anatomy.box_px;
  Polygon box_poly(box.begin(), box.end());
  double outside = std::max(0.0, field_px - Area(ClipToConvex(box_poly, field.polygon_px)));
  e.fraction_at_0mm = outside / field_px;
  if (!spacing_mm) return e;
  const std::array<double, 2>& sp = *spacing_mm;
  e.area_mm2 = outside * sp[0] * sp[1];
  if (magnification) e.area_patient_mm2 = *e.area_mm2 / (*magnification * *magnification);
  FieldFrame frame(field.rotation_deg);
  BoxExtents x = metrics_internal::ExtentsOf(frame, box_poly);
  double mu = margin_mm / MmPerPixelAlong(sp, {frame.c, frame.s});
  double mv = margin_mm / MmPerPixelAlong(sp, {-frame.s, frame.c});
  BoxExtents grown = {x[0] - mu, x[1] + mu, x[2] - mv, x[3] + mv};
  auto corners = metrics_internal::BoxCorners(frame, grown);
  Polygon grown_poly(corners.begin(), corners.end());
  double outside_margin =
      std::max(0.0, field_px - Area(ClipToConvex(grown_poly, field.polygon_px)));
  e.fraction_at_margin = outside_margin / field_px;
  Point2d inside = Centroid(box_poly);
  for (Side side : kAllSides) {
    if (!Assessable(field, side)) continue;
    const SideMeasurement& s = field.side(side);
    Line line = LineThrough(s.line_px->a, s.line_px->b);
    double mm = GapToBlade(s, box, inside) * MmPerPixelAlong(sp, {line.nx, line.ny});
    int k = static_cast<int>(side);
    e.per_side_mm[k] = mm;
    if (magnification) e.per_side_patient_mm[k] = ToPatientPlane(mm, *magnification);
  }
  return e;
}

ReceptorMeasurement ComputeReceptor(const FieldMeasurement& field, int rows, int columns,
                                    const std::optional<std::array<double, 2>>& spacing_mm,
                                    const std::optional<std::array<double, 2>>& active_mm,
                                    std::optional<double> sid_mm) {
  ReceptorMeasurement r;
  r.active_mm = active_mm;
  if (spacing_mm) r.image_mm = std::array<double, 2>{rows * (*spacing_mm)[0], columns * (*spacing_mm)[1]};
  bool all = true;
  for (Side side : kAllSides) {
    r.assessable[static_cast<int>(side)] = Assessable(field, side);
    all = all && Assessable(field, side);
  }
  if (field.polygon_px.size() < 3 || rows <= 0 || columns <= 0) return r;
  FieldFrame frame(field.rotation_deg);
  BoxExtents e = metrics_internal::ExtentsOf(frame, field.polygon_px);
  r.field_fraction_of_image = Area(field.polygon_px) / (static_cast<double>(rows) * columns);
  if (!spacing_mm) return r;
  const std::array<double, 2>& sp = *spacing_mm;
  r.field_mm = std::array<double, 2>{(e[3] - e[2]) * MmPerPixelAlong(sp, {-frame.s, frame.c}),
                                     (e[1] - e[0]) * MmPerPixelAlong(sp, {frame.c, frame.s})};
  if (!all) return r;  // a blade beyond the image: the field's size and centre are unknown
  // Field centre from the four blade lines' corners (the polygon may be clipped by the image).
  Point2d centre = Centroid(field.polygon_px);
  Line l = LineThrough(field.side(Side::kLeft).line_px->a, field.side(Side::kLeft).line_px->b);
  Line rr = LineThrough(field.side(Side::kRight).line_px->a, field.side(Side::kRight).line_px->b);
  Line t = LineThrough(field.side(Side::kTop).line_px->a, field.side(Side::kTop).line_px->b);
  Line b = LineThrough(field.side(Side::kBottom).line_px->a, field.side(Side::kBottom).line_px->b);
  Point2d c[4];
  if (Intersect(l, t, &c[0]) && Intersect(rr, t, &c[1]) && Intersect(rr, b, &c[2]) &&
      Intersect(l, b, &c[3])) {
    centre = {(c[0].x + c[1].x + c[2].x + c[3].x) / 4, (c[0].y + c[1].y + c[2].y + c[3].y) / 4};
  }
  r.centre_offset_mm = std::hypot((centre.x - columns / 2.0) * sp[1], (centre.y - rows / 2.0) * sp[0]);
  if (!sid_mm || !(*sid_mm > 0.0)) return r;
  r.centre_offset_pct_sid = *r.centre_offset_mm / *sid_mm * 100.0;
  // Length and width only compare with the receptor when the field is not rotated.
  if (std::fabs(field.rotation_deg) < 1.0) {
    std::array<double, 2> receptor = active_mm ? *active_mm : *r.image_mm;
    PblCheck pbl = CheckPositiveBeamLimitation((*r.field_mm)[0], (*r.field_mm)[1], receptor[0],
                                               receptor[1], *sid_mm);
    r.size_difference_pct_sid = pbl.sum_pct_sid;
    r.pbl_within_limits = pbl.within_limits;
  }
  return r;
}

std::optional<DeclaredComparison> CompareDeclared(
    const FieldMeasurement& field, const RadiographHeader& header,
    const std::optional<std::array<double, 2>>& spacing_mm, std::optional<double> sid_mm) {
  DeclaredComparison d;
  std::optional<DeclaredEdges> edges;
  if (header.collimator_edges) {
    d.source = "collimator";
    edges = header.collimator_edges;
  } else if (header.shutter_edges) {
    d.source = "shutter";
    edges = header.shutter_edges;
  } else {
    return std::nullopt;
  }
  // An axis-aligned declaration says nothing about a rotated field's edges.
  if (!spacing_mm || std::fabs(field.rotation_deg) > 3.0) return d;
  // 1-based pixel numbers; the edge is taken at the centre of the named pixel.
  double x0 = edges->left - 0.5, x1 = edges->right - 0.5;
  double y0 = edges->upper - 0.5, y1 = edges->lower - 0.5;
  double xm = 0.5 * (x0 + x1), ym = 0.5 * (y0 + y1);
  for (Side side : kAllSides) {
    if (!Assessable(field, side)) continue;
    Line line = LineThrough(field.side(side).line_px->a, field.side(side).line_px->b);
    bool vertical = side == Side::kLeft || side == Side::kRight;
    double along = vertical ? line.nx : line.ny;
    if (std::fabs(along) < 0.5) continue;
    double detected = vertical ? (line.c - line.ny * ym) / line.nx : (line.c - line.nx * xm) / line.ny;
    double declared = side == Side::kLeft ? x0 : side == Side::kRight ? x1
                      : side == Side::kTop ? y0 : y1;
    double outward = side == Side::kLeft || side == Side::kTop ? declared - detected
                                                               : detected - declared;
    DeclaredEdgeDeviation dev;
    dev.side = side;
    dev.deviation_mm = outward * (vertical ? (*spacing_mm)[1] : (*spacing_mm)[0]);
    if (sid_mm && *sid_mm > 0.0) {
      dev.deviation_pct_sid = dev.deviation_mm / *sid_mm * 100.0;
      dev.beyond_limit = !WithinTwoPercentOfSid(dev.deviation_mm, *sid_mm);
    }
    d.edges.push_back(dev);
  }
  return d;
}

}  // namespace beamtrim
