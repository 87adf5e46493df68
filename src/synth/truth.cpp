// The exact truth of a scenario, from its geometry alone (docs/synth.md, "Truth"): the field
// is the geometric projection of the blade edges (the 50 % point of a symmetric penumbra),
// clipped to the image; the anatomy box is the smallest rectangle along the field axes that
// holds the patient tissue inside the field.
#include <algorithm>
#include <cmath>
#include <cstdint>

#include "beamtrim/rules.h"
#include "synth/model.h"
#include "synth/phantom.h"
#include "synth/synth_internal.h"

namespace beamtrim {
namespace synth_internal {
namespace {

// Liang-Barsky clip of a segment to [x0, x1] x [y0, y1]; false when nothing is left.
bool ClipSegment(Segment& s, double x0, double y0, double x1, double y1) {
  double t0 = 0.0, t1 = 1.0;
  double dx = s.b.x - s.a.x, dy = s.b.y - s.a.y;
  const double p[4] = {-dx, dx, -dy, dy};
  const double q[4] = {s.a.x - x0, x1 - s.a.x, s.a.y - y0, y1 - s.a.y};
  for (int i = 0; i < 4; ++i) {
    if (p[i] == 0.0) {
      if (q[i] < 0.0) return false;
      continue;
    }
    double t = q[i] / p[i];
    if (p[i] < 0.0) t0 = std::max(t0, t); else t1 = std::min(t1, t);
  }
  if (t0 >= t1) return false;
  Segment out{{s.a.x + t0 * dx, s.a.y + t0 * dy}, {s.a.x + t1 * dx, s.a.y + t1 * dy}};
  s = out;
  return true;
}

double Length(const Segment& s) { return std::hypot(s.b.x - s.a.x, s.b.y - s.a.y); }

// Union area of polygons by sampling a fine grid at cell centres (even-odd rule per polygon,
// union across polygons). Centre sampling is unbiased at the boundary, unlike filling every
// touched cell. Edges are walked once each, pushing their crossings into the rows they span.
double UnionAreaPx(const std::vector<Polygon>& pieces, int width, int height) {
  const int ss = std::clamp(4000 / std::max(width, height), 1, 4);
  const int rows = height * ss, cols = width * ss;
  std::vector<uint8_t> mask(static_cast<size_t>(rows) * cols, 0);
  std::vector<std::vector<double>> cross(static_cast<size_t>(rows));
  for (const Polygon& poly : pieces) {
    if (poly.size() < 3) continue;
    int r_lo = rows, r_hi = -1;
    for (size_t i = 0; i < poly.size(); ++i) {
      Point2d a = poly[i], b = poly[(i + 1) % poly.size()];
      if (a.y == b.y) continue;
      if (a.y > b.y) std::swap(a, b);
      // Rows whose centre (r + 0.5) / ss lies in [a.y, b.y).
      int r0 = std::max(0, static_cast<int>(std::ceil(a.y * ss - 0.5)));
      int r1 = std::min(rows - 1, static_cast<int>(std::ceil(b.y * ss - 0.5)) - 1);
      for (int r = r0; r <= r1; ++r) {
        double yc = (r + 0.5) / ss;
        cross[static_cast<size_t>(r)].push_back(a.x + (yc - a.y) * (b.x - a.x) / (b.y - a.y));
      }
      r_lo = std::min(r_lo, r0);
      r_hi = std::max(r_hi, r1);
    }
    for (int r = r_lo; r <= r_hi; ++r) {
      std::vector<double>& xs = cross[static_cast<size_t>(r)];
      std::sort(xs.begin(), xs.end());
      for (size_t k = 0; k + 1 < xs.size(); k += 2) {
        int c0 = std::max(0, static_cast<int>(std::ceil(xs[k] * ss - 0.5)));
        int c1 = std::min(cols, static_cast<int>(std::ceil(xs[k + 1] * ss - 0.5)));
        if (c1 > c0) std::fill_n(mask.begin() + static_cast<long>(r) * cols + c0, c1 - c0, 1);
      }
      xs.clear();
    }
  }
  size_t n = static_cast<size_t>(std::count(mask.begin(), mask.end(), 1));
  return static_cast<double>(n) / (ss * ss);
}

}  // namespace

FieldGeometry ComputeFieldGeometry(const SynthScenario& sc) {
  FieldGeometry g;
  g.window = WindowOf(sc);
  FieldFrame f(sc);
  const auto& e = sc.edge_mm;
  std::array<Point2d, 4> mm = {f.FromField(-e[0], -e[2]), f.FromField(e[1], -e[2]),
                               f.FromField(e[1], e[3]), f.FromField(-e[0], e[3])};
  for (int i = 0; i < 4; ++i) g.corners_px[i] = MmToPx(sc, g.window, mm[i]);
  g.unclipped = Polygon(g.corners_px.begin(), g.corners_px.end());
  MakeClockwise(g.unclipped);
  g.clipped = ClipToRect(g.unclipped, g.window.w, g.window.h);
  MakeClockwise(g.clipped);
  // Side k runs between these corners (top-left, top-right, bottom-right, bottom-left).
  const int a[4] = {3, 1, 0, 2}, b[4] = {0, 2, 1, 3};
  for (int k = 0; k < 4; ++k) g.edges_px[k] = {g.corners_px[a[k]], g.corners_px[b[k]]};
  return g;
}

}  // namespace synth_internal

Polygon TrueFieldPolygonPx(const SynthScenario& scenario) {
  return synth_internal::ComputeFieldGeometry(scenario).unclipped;
}

namespace synth_internal {
namespace {

FieldMeasurement FieldTruth(const SynthScenario& sc, const FieldGeometry& g) {
  FieldMeasurement f;
  const double p = sc.pixel_mm;
  f.polygon_px = g.clipped;
  f.area_px = Area(g.clipped);
  f.area_mm2 = f.area_px * p * p;
  f.rotation_deg = sc.rotation_deg;
  f.confidence = 1.0;
  f.double_exposure = sc.double_exposure;
  // The unmasked part of the image, in image pixels.
  const PixelWindow& w = g.window;
  const auto [bx0, by0, bx1, by1] = UnmaskedRectPx(sc, w);
  for (int i = 0; i < 4; ++i) f.blanked = f.blanked || sc.blank[i].active;
  f.cropped = w.x0 > 0 || w.y0 > 0 || w.w < w.receptor_w || w.h < w.receptor_h;
  const double min_len = 2.0 / p;  // a shadow shorter than 2 mm does not count as visible
  bool any_visible = false;
  for (Side side : kAllSides) {
    int k = static_cast<int>(side);
    SideMeasurement& s = f.sides[k];
    s.side = side;
    double pd = GeometricPenumbraMm(sc.focal_spot_mm, sc.sid_mm,
                                    k < 2 ? sc.blade_distance_lr_mm : sc.blade_distance_tb_mm);
    Segment in_receptor = g.edges_px[k];
    bool on_receptor = ClipSegment(in_receptor, -w.x0, -w.y0, w.receptor_w - w.x0, w.receptor_h - w.y0) &&
                       Length(in_receptor) >= min_len;
    Segment in_image = g.edges_px[k];
    bool on_image = ClipSegment(in_image, 0, 0, w.w, w.h) && Length(in_image) >= min_len;
    Segment unmasked = in_image;
    bool shown = on_image && ClipSegment(unmasked, bx0, by0, bx1, by1) && Length(unmasked) >= min_len;
    if (shown) {
      s.visible = true;
      s.confidence = 1.0;
      s.line_px = in_image;
      s.penumbra_px = 0.8 * pd / p;  // 10-90 % of the focal-spot ramp (uniform focal spot)
      any_visible = true;
    } else if (on_image) {
      s.reason = "blanked";
      f.blanked_or_cropped_sides.push_back(side);
    } else if (on_receptor) {
      s.reason = "cropped";
      f.blanked_or_cropped_sides.push_back(side);
    } else {
      s.reason = "blade beyond the receptor";
    }
  }
  f.open = !any_visible;
  f.notes.push_back("synthetic ground truth (geometric blade projection)");
  return f;
}

}  // namespace
}  // namespace synth_internal
}  // namespace beamtrim

namespace beamtrim {
namespace synth_internal {
namespace {

struct AnatomyTruth {
  AnatomyMeasurement anatomy;
  std::array<double, 4> box_uv{};  // u0, u1, v0, v1 in field-frame pixels
};

// Field frame in image pixels: same rotation, origin at the central ray.
struct PxFrame {
  double ox, oy, c, s;
  Point2d To(Point2d p) const {
    double dx = p.x - ox, dy = p.y - oy;
    return {dx * c + dy * s, -dx * s + dy * c};
  }
  Point2d From(double u, double v) const { return {ox + u * c - v * s, oy + u * s + v * c}; }
};

PxFrame FrameOf(const SynthScenario& sc, const PixelWindow& w) {
  Point2d o = MmToPx(sc, w, {sc.ray_x_mm, sc.ray_y_mm});
  double r = sc.rotation_deg * kPi / 180.0;
  return {o.x, o.y, std::cos(r), std::sin(r)};
}

AnatomyTruth AnatomyOf(const SynthScenario& sc, const FieldGeometry& g,
                       const std::vector<Polygon>& tissue_px, const FieldMeasurement& field) {
  AnatomyTruth t;
  std::vector<Polygon> pieces;
  std::vector<Point2d> points;
  for (const Polygon& poly : tissue_px) {
    Polygon piece = ClipToConvex(poly, g.clipped);
    if (piece.size() < 3 || Area(piece) <= 0.0) continue;
    points.insert(points.end(), piece.begin(), piece.end());
    pieces.push_back(std::move(piece));
  }
  if (pieces.empty()) return t;
  PxFrame fr = FrameOf(sc, g.window);
  double u0 = 1e300, u1 = -1e300, v0 = 1e300, v1 = -1e300;
  for (const Point2d& p : points) {
    Point2d q = fr.To(p);
    u0 = std::min(u0, q.x); u1 = std::max(u1, q.x);
    v0 = std::min(v0, q.y); v1 = std::max(v1, q.y);
  }
  t.box_uv = {u0, u1, v0, v1};
  t.anatomy.found = true;
  t.anatomy.box_px = std::array<Point2d, 4>{fr.From(u0, v0), fr.From(u1, v0), fr.From(u1, v1),
                                            fr.From(u0, v1)};
  t.anatomy.hull_px = ConvexHull(points);
  double p = sc.pixel_mm;
  // Sampling noise could nudge the area past the field's; the tissue lies inside it.
  t.anatomy.area_mm2 = std::min(UnionAreaPx(pieces, g.window.w, g.window.h), Area(g.clipped)) * p * p;
  // A side is clipped when tissue (within the image) runs across its blade edge.
  const double tol = 1e-6;
  const double edge_uv[4] = {-sc.edge_mm[0] / p, sc.edge_mm[1] / p, -sc.edge_mm[2] / p,
                             sc.edge_mm[3] / p};
  const double box_side[4] = {u0, u1, v0, v1};
  for (Side side : kAllSides) {
    int k = static_cast<int>(side);
    const SideMeasurement& sm = field.sides[k];
    bool edge_in_image = sm.visible || sm.reason == "blanked";
    if (!edge_in_image || std::fabs(box_side[k] - edge_uv[k]) > tol * std::max(1.0, std::fabs(edge_uv[k])) + 1e-6)
      continue;
    bool beyond = false;
    for (const Polygon& poly : tissue_px) {
      Polygon in_image = ClipToRect(poly, g.window.w, g.window.h);
      for (const Point2d& q : in_image) {
        Point2d uv = fr.To(q);
        double out = k == 0 ? edge_uv[0] - uv.x : k == 1 ? uv.x - edge_uv[1]
                   : k == 2 ? edge_uv[2] - uv.y : uv.y - edge_uv[3];
        if (out > 1e-3) { beyond = true; break; }
      }
      if (beyond) break;
    }
    if (beyond) t.anatomy.at_blade_sides.push_back(side);
  }
  // Every phantom is built with its long axis along its own +y, the limb or neck that leaves
  // the region (forearm, neck) towards +y; the foot phantom has no leg and ends at the heel.
  // The axis direction (-sin a, cos a) in the field frame gives the ends and the continuing end
  // (the definition of docs/method.md "Clipping", from the geometry instead of the pixels).
  double rel = (sc.anatomy_rotation_deg - sc.rotation_deg) * kPi / 180.0;
  double along_u = -std::sin(rel), along_v = std::cos(rel);
  if (std::fabs(along_v) >= std::fabs(along_u)) {
    t.anatomy.ends = std::array<Side, 2>{Side::kTop, Side::kBottom};
    t.anatomy.continuing_end = along_v > 0 ? Side::kBottom : Side::kTop;
  } else {
    t.anatomy.ends = std::array<Side, 2>{Side::kLeft, Side::kRight};
    t.anatomy.continuing_end = along_u > 0 ? Side::kRight : Side::kLeft;
  }
  if (sc.body_part == SynthBodyPart::kFoot) t.anatomy.continuing_end.reset();
  // The shipped default rules say, per exam, which edges the body is expected to run through.
  static const std::shared_ptr<const RuleSet> rules = [] {
    auto loaded = RuleSet::Parse(DefaultRulesJson(), "built-in defaults");
    return loaded.ok() ? *loaded : nullptr;
  }();
  if (rules) {
    const Rule& rule = rules->Find(SynthBodyPartName(sc.body_part), sc.view);
    t.anatomy.clipped_sides = CutOffSides(t.anatomy.at_blade_sides, t.anatomy.ends,
                                          t.anatomy.continuing_end, rule);
  } else {
    t.anatomy.clipped_sides = t.anatomy.at_blade_sides;
  }
  return t;
}

ExcessMeasurement ExcessOf(const SynthScenario& sc, const FieldGeometry& g,
                           const AnatomyTruth& at, const FieldMeasurement& field) {
  ExcessMeasurement e;
  if (!at.anatomy.found || !at.anatomy.box_px) return e;
  const double p = sc.pixel_mm, m = Magnification(sc);
  const auto& b = *at.anatomy.box_px;
  Polygon box(b.begin(), b.end());
  double inside = Area(ClipToConvex(box, g.clipped));
  double field_px = Area(g.clipped);
  e.area_mm2 = std::max(0.0, field_px - inside) * p * p;
  e.area_patient_mm2 = *e.area_mm2 / (m * m);
  e.fraction_at_0mm = field_px > 0 ? std::max(0.0, field_px - inside) / field_px : 0.0;
  e.margin_mm = 0.0;
  const double edge_uv[4] = {-sc.edge_mm[0] / p, sc.edge_mm[1] / p, -sc.edge_mm[2] / p,
                             sc.edge_mm[3] / p};
  const auto& u = at.box_uv;
  const double gap_px[4] = {u[0] - edge_uv[0], edge_uv[1] - u[1], u[2] - edge_uv[2],
                            edge_uv[3] - u[3]};
  for (int k = 0; k < 4; ++k) {
    if (!field.sides[k].visible) continue;
    e.per_side_mm[k] = std::max(0.0, gap_px[k]) * p;
    e.per_side_patient_mm[k] = *e.per_side_mm[k] / m;
  }
  return e;
}

ReceptorMeasurement ReceptorOf(const SynthScenario& sc, const FieldGeometry& g,
                               const FieldMeasurement& field) {
  ReceptorMeasurement r;
  const double p = sc.pixel_mm;
  const PixelWindow& w = g.window;
  r.active_mm = std::array<double, 2>{w.receptor_h * p, w.receptor_w * p};
  r.image_mm = std::array<double, 2>{w.h * p, w.w * p};
  PxFrame fr = FrameOf(sc, w);
  double u0 = 1e300, u1 = -1e300, v0 = 1e300, v1 = -1e300;
  for (const Point2d& q : g.clipped) {
    Point2d uv = fr.To(q);
    u0 = std::min(u0, uv.x); u1 = std::max(u1, uv.x);
    v0 = std::min(v0, uv.y); v1 = std::max(v1, uv.y);
  }
  if (!g.clipped.empty()) r.field_mm = std::array<double, 2>{(v1 - v0) * p, (u1 - u0) * p};
  r.field_fraction_of_image = Area(g.clipped) / (static_cast<double>(w.w) * w.h);
  bool all = true;
  for (int k = 0; k < 4; ++k) {
    r.assessable[k] = field.sides[k].visible;
    all = all && r.assessable[k];
  }
  if (all) {
    Point2d c{0, 0};
    for (const Point2d& q : g.corners_px) c = {c.x + q.x / 4, c.y + q.y / 4};
    r.centre_offset_mm = std::hypot(c.x - w.w / 2.0, c.y - w.h / 2.0) * p;
    r.centre_offset_pct_sid = *r.centre_offset_mm / sc.sid_mm * 100.0;
    if (sc.rotation_deg == 0.0) {
      double dl = std::fabs((sc.edge_mm[2] + sc.edge_mm[3]) - (*r.active_mm)[0]);
      double dw = std::fabs((sc.edge_mm[0] + sc.edge_mm[1]) - (*r.active_mm)[1]);
      r.size_difference_pct_sid = (dl + dw) / sc.sid_mm * 100.0;
      // 21 CFR 1020.31: each difference within 3 % of SID, their sum within 4 %.
      r.pbl_within_limits = dl <= 0.03 * sc.sid_mm && dw <= 0.03 * sc.sid_mm &&
                            dl + dw <= 0.04 * sc.sid_mm;
    }
  }
  return r;
}

std::optional<DeclaredComparison> DeclaredOf(const SynthScenario& sc) {
  if (sc.declared.empty()) return std::nullopt;
  DeclaredComparison d;
  d.source = sc.declared;
  for (Side side : kAllSides) {
    int k = static_cast<int>(side);
    double offset = sc.declared == "collimator" ? sc.declared_offset_mm[k] : 0.0;
    DeclaredEdgeDeviation dev;
    dev.side = side;
    dev.deviation_mm = -offset;  // detected (true) minus declared, outward positive
    dev.deviation_pct_sid = dev.deviation_mm / sc.sid_mm * 100.0;
    dev.beyond_limit = std::fabs(dev.deviation_mm) > 0.02 * sc.sid_mm;  // 21 CFR 1020.31(d)
    d.edges.push_back(dev);
  }
  return d;
}

}  // namespace

double UnclippedFieldAreaMm2(const SynthScenario& sc) {
  double w = std::min(sc.edge_mm[0] + sc.edge_mm[1], 1000.0);
  double h = std::min(sc.edge_mm[2] + sc.edge_mm[3], 1000.0);
  return w * h;
}

}  // namespace synth_internal

ImageRecord ComputeTruth(const SynthScenario& sc) {
  using namespace synth_internal;
  ImageRecord rec;
  RadiographHeader h = BuildHeader(sc);
  FieldGeometry g = ComputeFieldGeometry(sc);
  rec.file = ImageName(sc) + ".dcm";
  rec.sop_instance_uid = h.sop_instance_uid;
  rec.rows = g.window.h;
  rec.columns = g.window.w;
  rec.pixel_spacing_mm = std::array<double, 2>{sc.pixel_mm, sc.pixel_mm};
  RecordContext& c = rec.context;
  c.modality = h.modality;
  c.presentation_intent = h.presentation_intent_type;
  c.photometric = h.photometric_interpretation;
  c.operator_name = h.operators_name;
  c.station = h.station_name;
  c.body_part = h.body_part_examined;
  c.view = h.view_position;
  c.protocol = h.protocol_name;
  c.study_date = h.study_date;
  c.month = h.study_date.substr(0, 4) + "-" + h.study_date.substr(4, 2);
  c.sid_mm = sc.sid_mm;
  c.source_patient_mm = sc.source_patient_mm;
  c.magnification = Magnification(sc);
  c.linear = sc.output == SynthOutput::kRaw;
  c.transfer_syntax = TransferSyntaxName(sc.syntax);

  FieldMeasurement field = FieldTruth(sc, g);
  if (sc.double_exposure) {
    FieldGeometry g2 = ComputeFieldGeometry(SecondExposure(sc));
    std::string note = "second exposure field (px):";
    for (const Point2d& q : g2.clipped) note += " " + std::to_string(q.x) + "," + std::to_string(q.y);
    field.notes.push_back(note);
  }
  SceneObjects scene = BuildScene(sc);
  std::vector<Polygon> tissue_px;
  for (Polygon& poly : scene.patient.TissueOutlines()) {
    for (Point2d& q : poly) q = MmToPx(sc, g.window, q);
    tissue_px.push_back(std::move(poly));
  }
  AnatomyTruth at = AnatomyOf(sc, g, tissue_px, field);
  rec.excess = ExcessOf(sc, g, at, field);
  rec.anatomy = at.anatomy;
  rec.receptor = ReceptorOf(sc, g, field);
  rec.declared = DeclaredOf(sc);
  if (rec.declared) {
    for (const DeclaredEdgeDeviation& d : rec.declared->edges) {
      if (d.deviation_mm != 0.0)
        field.notes.push_back(std::string("declared ") + SideName(d.side) + " edge offset " +
                              std::to_string(-d.deviation_mm) + " mm outward");
    }
  }
  rec.field = std::move(field);
  DoseMeasurement dose;
  dose.kap_dgy_cm2 = h.area_dose_product_dgy_cm2;
  if (rec.excess && rec.excess->fraction_at_0mm && dose.kap_dgy_cm2)
    dose.avoidable_kap_dgy_cm2 = *dose.kap_dgy_cm2 * *rec.excess->fraction_at_0mm;
  dose.exposure_index = h.exposure_index;
  dose.target_exposure_index = h.target_exposure_index;
  dose.deviation_index = h.deviation_index;
  rec.dose = dose;
  rec.notes.push_back("synthetic ground truth; situation " + std::string(SynthSituationName(sc.situation)));
  rec.software_version = "synth";
  return rec;
}

}  // namespace beamtrim
