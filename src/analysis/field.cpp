// DetectField: the stages of docs/method.md ("Field detection") in order. Working resolution
// and blanking, field angle and rectangle hypotheses, sub-pixel refinement, polygon, then the
// cropping and double-exposure checks.
#include <algorithm>
#include <cmath>
#include <string>
#include <tuple>

#include <opencv2/imgproc.hpp>

#include "analysis/field_internal.h"
#include "beamtrim/dicom.h"
#include "beamtrim/field.h"

namespace beamtrim {

using namespace field_internal;

namespace {

constexpr double kDeg = M_PI / 180.0;
// Offset added to linear values before the logarithm, as a share of the brightest exposure.
constexpr double kLogOffset = 0.01;

struct Prepared {
  WorkingImage working;
  cv::Mat1f gx, gy, grad;
  double working_mm = 0.0;  // 0 when the spacing is unknown
};

Prepared Prepare(const Image& image, const FieldContext& ctx, const FieldOptions& opt,
                 BlankResult* blank, bool* linear) {
  Prepared p;
  WorkingImage& wk = p.working;
  wk.factor = WorkingFactor(image, ctx, opt);
  Blocks blocks = DownsampleBlocks(image, wk.factor);
  *blank = FindBlankMask(image, blocks, wk.factor, *linear);
  cv::Mat1b mask;
  cv::dilate(blank->mask, mask, cv::Mat(), cv::Point(-1, -1), 2);
  wk.blanked = blank->mask;
  wk.valid = mask == 0;
  for (int y = 0; y < blocks.mean.rows; ++y) {
    for (int x = 0; x < blocks.mean.cols; ++x) {
      if (!std::isfinite(blocks.mean(y, x))) { wk.valid(y, x) = 0; blocks.mean(y, x) = 0.0f; }
    }
  }
  wk.value = blocks.mean;
  if (*linear) {
    // Logarithm so that contrast is a ratio, whatever the dose; a floor keeps dead or
    // offset-clipped pixels finite. The offset of 1 % of the brightest exposure compresses
    // what lies far below it: under the blades, leakage, scatter and the off-focus halo fall
    // from a few per cent of the open beam to a fraction of a per mille, a large fall on a
    // pure logarithm (the halo's end looks like a second, stronger blade) but a negligible one
    // in exposure, which is what a blade blocks.
    const double top = Percentile(wk.value, wk.valid, 99.9);
    if (top > 0.0) {
      wk.log_floor = 1e-4 * top;
      wk.log_offset = kLogOffset * top;
      cv::max(wk.value, wk.log_floor, wk.value);
      wk.value += wk.log_offset;
      cv::log(wk.value, wk.value);
      wk.linear = true;
    } else {
      *linear = false;
    }
  }
  wk.lo = Percentile(wk.value, wk.valid, 0.1);
  wk.hi = Percentile(wk.value, wk.valid, 99.9);
  cv::Mat1f smooth;
  cv::GaussianBlur(wk.value, smooth, cv::Size(0, 0), 0.8);
  cv::Sobel(smooth, p.gx, CV_32F, 1, 0, 3, 1.0 / 8.0);
  cv::Sobel(smooth, p.gy, CV_32F, 0, 1, 3, 1.0 / 8.0);
  cv::magnitude(p.gx, p.gy, p.grad);
  if (ctx.spacing_mm) {
    p.working_mm = wk.factor * std::min((*ctx.spacing_mm)[0], (*ctx.spacing_mm)[1]);
  }
  return p;
}

// The part of the image that was not blanked, as a convex polygon in full pixels.
Polygon BaseRegion(const Image& image, const WorkingImage& wk) {
  Polygon rect = RectPolygon(0, 0, image.width(), image.height());
  if (cv::countNonZero(wk.blanked) == 0) return rect;
  std::vector<cv::Point> pts;
  cv::findNonZero(wk.blanked == 0, pts);
  if (pts.size() < 3) return rect;
  std::vector<cv::Point> hull;
  cv::convexHull(pts, hull);
  std::vector<Point2d> corners;
  for (const cv::Point& q : hull) {
    for (int dx = 0; dx <= 1; ++dx) {
      for (int dy = 0; dy <= 1; ++dy) {
        corners.push_back({double(q.x + dx) * wk.factor, double(q.y + dy) * wk.factor});
      }
    }
  }
  return ClipToConvex(rect, ConvexHull(corners));
}

// Where the line meets the convex polygon: the extreme vertices of `region` clipped by it.
std::optional<Segment> LineInRegion(const Polygon& region, const Line& line) {
  Polygon cut = ClipHalfPlane(region, line);
  const double tx = -line.ny, ty = line.nx;
  double tmin = 1e300, tmax = -1e300;
  Segment seg;
  for (const Point2d& p : cut) {
    if (std::fabs(line.SignedDistance(p)) > 1e-6 * (1.0 + std::fabs(line.c))) continue;
    const double t = p.x * tx + p.y * ty;
    if (t < tmin) { tmin = t; seg.a = p; }
    if (t > tmax) { tmax = t; seg.b = p; }
  }
  if (!(tmax > tmin)) return std::nullopt;
  return seg;
}

double SideAngle(Side s, const Line& l) {
  double a = 0.0;
  switch (s) {
    case Side::kLeft: a = std::atan2(-l.ny, -l.nx); break;
    case Side::kRight: a = std::atan2(l.ny, l.nx); break;
    case Side::kTop: a = std::atan2(l.nx, -l.ny); break;
    case Side::kBottom: a = std::atan2(-l.nx, l.ny); break;
  }
  return a / kDeg;
}

double SideConfidence(const SideEvidence& e, double range) {
  const double rel = e.step / std::max(range, 1e-9);
  // A side kept because the rectangle closes on it failed the bright-beyond test: the margin
  // there is taken as none (confidence 0.5 at most) rather than negative.
  const double bright_margin = e.lifted ? 0.0 : (kMaxBrightShare - e.bright) / kMaxBrightShare;
  const double margin = std::min({(e.support - 0.6) / 0.4, bright_margin,
                                  (kMaxTexturedShare - e.texture) / kMaxTexturedShare,
                                  (kMaxFallOff - e.flatness) / kMaxFallOff,
                                  (rel - kMinRelativeStep) / 0.12, 1.0});
  return std::clamp(0.5 + 0.5 * margin, 0.0, 1.0);
}

// Image axes along which the image is clearly smaller than the receptor: [rows, columns].
std::array<bool, 2> CroppedAxes(const Image& image, const FieldContext& ctx) {
  std::array<bool, 2> out{false, false};
  if (!ctx.receptor_mm || !ctx.spacing_mm) return out;
  const double rows_mm = image.height() * (*ctx.spacing_mm)[0];
  const double cols_mm = image.width() * (*ctx.spacing_mm)[1];
  auto receptor = *ctx.receptor_mm;
  // Some headers give the receptor as length x width whatever the orientation of the image.
  if ((rows_mm > receptor[0] * 1.03 || cols_mm > receptor[1] * 1.03) &&
      rows_mm <= receptor[1] * 1.03 && cols_mm <= receptor[0] * 1.03) {
    std::swap(receptor[0], receptor[1]);
  }
  auto smaller = [](double image_mm, double rec_mm) {
    return rec_mm - image_mm > std::max(5.0, 0.02 * rec_mm);
  };
  out[0] = smaller(rows_mm, receptor[0]);
  out[1] = smaller(cols_mm, receptor[1]);
  return out;
}

// For a side without a blade: does the field end there at the blanking mask (true) or at the
// image border? Probes just beyond the polygon edges facing that side.
bool EndsAtMask(const Polygon& poly, const Line& outward, const WorkingImage& wk) {
  int mask_hits = 0, probes = 0;
  const double step = 3.0 * wk.factor;
  for (size_t i = 0; i < poly.size(); ++i) {
    const Point2d a = poly[i], b = poly[(i + 1) % poly.size()];
    const double len = std::hypot(b.x - a.x, b.y - a.y);
    if (len < 1e-9) continue;
    Line l = LineThrough(a, b);
    // Outward normal of this polygon edge: away from the centroid side.
    Point2d c{0, 0};
    for (const Point2d& q : poly) { c.x += q.x / poly.size(); c.y += q.y / poly.size(); }
    if (l.SignedDistance(c) > 0) l = Line{-l.nx, -l.ny, -l.c};
    if (l.nx * outward.nx + l.ny * outward.ny < std::cos(45.0 * kDeg)) continue;
    for (int k = 0; k < 9; ++k) {
      const double t = (k + 0.5) / 9.0;
      const double x = a.x + t * (b.x - a.x) + step * l.nx;
      const double y = a.y + t * (b.y - a.y) + step * l.ny;
      ++probes;
      const int wx = static_cast<int>(std::floor(x / wk.factor));
      const int wy = static_cast<int>(std::floor(y / wk.factor));
      if (wx < 0 || wy < 0 || wx >= wk.blanked.cols || wy >= wk.blanked.rows) continue;
      mask_hits += wk.blanked(wy, wx) ? 1 : 0;
    }
  }
  return probes > 0 && mask_hits * 2 > probes;
}

// With one blade or two adjacent ones visible, the others lie beyond the receptor: the beam reaches past
// the image on those sides, so the field is large. A "field" of one or two lines that covers
// only a small part of the image is the outline of the patient seen from the direct beam (a
// thin strip of direct exposure beside the body), not collimation; the image is then open.
void DropImplausibleCorner(const Polygon& base, std::array<std::optional<Line>, 4>* coarse) {
  int visible = 0;
  Polygon field = base;
  for (const auto& l : *coarse) {
    if (!l) continue;
    ++visible;
    field = ClipHalfPlane(field, *l);
  }
  if (visible == 0 || visible > 2) return;
  // Two parallel blades make a band across the whole image, which may well be narrow.
  const bool band = ((*coarse)[0] && (*coarse)[1]) || ((*coarse)[2] && (*coarse)[3]);
  if (band) return;
  const double share = field.size() >= 3 ? Area(field) / std::max(1.0, Area(base)) : 0.0;
  if (share < 0.25) {
    for (auto& l : *coarse) l.reset();
  }
}

// Rotation of the field from the fitted edges (the mean of their angles, each taken to the
// quarter turn nearest the search angle), in [-45, 45); 0 with none.
double FieldAngle(const std::array<std::optional<Line>, 4>& lines, double search_deg) {
  double sum = 0.0;
  int n = 0;
  for (Side s : kAllSides) {
    const auto& l = lines[static_cast<int>(s)];
    if (!l) continue;
    double a = SideAngle(s, *l);
    a -= 90.0 * std::round((a - search_deg) / 90.0);
    sum += a;
    ++n;
  }
  double angle = n ? sum / n : 0.0;
  if (angle >= 45.0) angle -= 90.0;
  if (angle < -45.0) angle += 90.0;
  return angle;
}

// Along-edge extent of a side between the perpendicular lines found, in full pixels (x for top
// and bottom, y for left and right), a few working pixels clear of their penumbrae.
std::pair<double, double> AlongExtent(const Polygon& base, const std::array<std::optional<Line>, 4>& lines,
                                      Side s, int factor) {
  Polygon region = base;
  for (Side o : kAllSides) {
    if (o != s && lines[static_cast<int>(o)]) region = ClipHalfPlane(region, *lines[static_cast<int>(o)]);
  }
  const bool vertical = s == Side::kLeft || s == Side::kRight;
  double lo = 1e300, hi = -1e300;
  for (const Point2d& p : region) {
    lo = std::min(lo, vertical ? p.y : p.x);
    hi = std::max(hi, vertical ? p.y : p.x);
  }
  const Side before = vertical ? Side::kTop : Side::kLeft;
  const Side after = vertical ? Side::kBottom : Side::kRight;
  if (lines[static_cast<int>(before)]) lo += 2.0 * factor;
  if (lines[static_cast<int>(after)]) hi -= 2.0 * factor;
  return {lo, hi};
}

// Whether a refined side follows an arc (FollowsAnArc): the bow of its refined points first,
// and only when that alone looks like an arc, the costlier second tracing.
bool EdgeFollowsAnArc(const Image& image, const WorkingImage& wk, const RefinedSide& r,
                      Point2d a, Point2d b, double pixel_mm) {
  const double length = std::hypot(b.x - a.x, b.y - a.y);
  const double min_sagitta_px = std::max(kArcMinSagittaMm / pixel_mm, kArcMinBowShare * length);
  if (!BowsCleanly(r.bow, min_sagitta_px)) return false;
  // Wide enough for the middle of an arc whose ends lie on the fitted line.
  const double half = r.window_px + 0.25 * length;
  const EdgeBow traced = TraceEdgeBow(image, r.line, a, b, half, r.level, &wk.valid, wk.factor);
  return FollowsAnArc(r.bow, traced, min_sagitta_px);
}

// Sides the working-resolution search left without a blade may still have one a few
// millimetres inside the border (FindBladeNearBorder). Only for fields square to the image
// within a few degrees: a turned blade runs away from the border and was searched already.
// `angle_deg`: the field angle fitted to the blades found (0 with none). Returns the sides
// added to `coarse` (their evidence set in `best`).
std::vector<Side> AddBladesNearBorder(const Image& image, const Prepared& prep,
                                      const FieldContext& ctx, const Polygon& base,
                                      double angle_deg, Rectangle* best,
                                      std::array<std::optional<Line>, 4>* coarse) {
  const WorkingImage& wk = prep.working;
  std::optional<double> blocked;
  for (Side s : kAllSides) {
    const int i = static_cast<int>(s);
    if (!(*coarse)[i]) continue;
    const double o = best->sides[i]->outside;
    blocked = blocked ? std::min(*blocked, o) : o;
  }
  std::vector<Side> added;
  if (std::fabs(angle_deg) > kMaxBorderFieldAngleDeg) return added;
  const std::array<std::optional<Line>, 4> found = *coarse;
  for (Side s : kAllSides) {
    const int i = static_cast<int>(s);
    if (found[i]) continue;
    BorderSearch in;
    in.side = s;
    in.angle_deg = angle_deg;
    std::tie(in.along_lo, in.along_hi) = AlongExtent(base, found, s, wk.factor);
    in.pitch_mm = ctx.spacing_mm ? std::min((*ctx.spacing_mm)[0], (*ctx.spacing_mm)[1]) : 0.0;
    in.lo = wk.lo;
    in.range = wk.hi - wk.lo;
    in.blocked = blocked;
    if (auto blade = FindBladeNearBorder(image, wk, in)) {
      (*coarse)[i] = blade->line;
      best->sides[i] = blade->evidence;
      added.push_back(s);
    }
  }
  return added;
}

}  // namespace

double field_internal::WorkingValue(const WorkingImage& wk, double mean) {
  if (!wk.linear) return mean;
  return std::log(std::max(mean, wk.log_floor) + wk.log_offset);
}

FieldContext FieldContextFromHeader(const RadiographHeader& header, bool linear) {
  FieldContext ctx;
  ctx.spacing_mm = header.DetectorSpacing();
  ctx.linear = linear;
  if (header.field_of_view_dimensions_mm) {
    ctx.receptor_mm = header.field_of_view_dimensions_mm;
  } else if (header.detector_active_dimensions_mm) {
    ctx.receptor_mm = header.detector_active_dimensions_mm;
  }
  return ctx;
}

FieldMeasurement DetectField(const Image& image, const FieldContext& ctx,
                             const FieldOptions& opt) {
  FieldMeasurement m;
  for (Side s : kAllSides) m.side(s).side = s;
  m.edge_definition = opt.edge_definition;
  const Polygon full = RectPolygon(0, 0, image.width(), image.height());
  if (image.width() < 16 || image.height() < 16) {
    m.polygon_px = full;
    m.area_px = Area(full);
    m.open = true;
    m.notes.push_back("image too small to look for blade shadows");
    for (Side s : kAllSides) m.side(s).reason = "image too small to assess";
    return m;
  }
  bool linear = ctx.linear;
  BlankResult blank;
  Prepared prep = Prepare(image, ctx, opt, &blank, &linear);
  const WorkingImage& wk = prep.working;
  if (ctx.linear && !linear) m.notes.push_back("pixel values not positive: treated as processed");
  if (opt.edge_definition == EdgeDefinition::kQuarterMaximum && !linear) {
    m.edge_definition = EdgeDefinition::kHalfTransition;
    m.notes.push_back("quarter-maximum edge needs linear pixel values: 50 % transition used");
  }
  const double range = wk.hi - wk.lo;
  const double depth_px = prep.working_mm > 0 ? 40.0 / prep.working_mm : 20.0;

  // Field angle and rectangle.
  std::vector<double> angles = CandidateAngles(wk, prep.gx, prep.gy, 3);
  bool has_zero = false;
  for (double a : angles) has_zero |= std::fabs(a) < 2.0;
  if (!has_zero) angles.push_back(0.0);
  Rectangle best;
  Frame best_frame;
  for (double a : angles) {
    Frame f = MakeFrame(wk, prep.grad, a);
    Rectangle r = BestRectangle(f, wk.lo, range, depth_px);
    if (r.score > best.score) { best = r; best_frame = std::move(f); }
  }

  const double min_band_px = prep.working_mm > 0 ? 15.0 / prep.working_mm : 6.0;
  const bool split = SplitAtBlockedBand(best_frame, range, depth_px, min_band_px, &best);

  Polygon base = BaseRegion(image, wk);
  std::array<std::optional<Line>, 4> coarse, refined;
  for (Side s : kAllSides) {
    const auto& ev = best.sides[static_cast<int>(s)];
    if (ev) coarse[static_cast<int>(s)] = FrameSideLine(best_frame, s, ev->position, wk.factor);
  }
  if (!blank.blanked) DropImplausibleCorner(base, &coarse);
  // Full-resolution pixel size (when the spacing is unknown, taken as the working pixel's
  // intended 2 mm over the factor).
  const double pixel_mm = (prep.working_mm > 0 ? prep.working_mm : 2.0) / wk.factor;
  std::array<bool, 4> arc_sides{};
  // Sub-pixel refinement of each blade edge between its neighbours.
  auto refine = [&](Side s) {
    const int i = static_cast<int>(s);
    Polygon others = base;
    for (Side o : kAllSides) {
      if (o != s && coarse[static_cast<int>(o)]) others = ClipHalfPlane(others, *coarse[static_cast<int>(o)]);
    }
    auto seg = LineInRegion(others, *coarse[i]);
    refined[i] = coarse[i];
    if (!seg) return;
    const double len = std::hypot(seg->b.x - seg->a.x, seg->b.y - seg->a.y);
    const double margin = std::min(0.25 * len, 4.0 * wk.factor);
    const double tx = (seg->b.x - seg->a.x) / len, ty = (seg->b.y - seg->a.y) / len;
    const Point2d a{seg->a.x + margin * tx, seg->a.y + margin * ty};
    const Point2d b{seg->b.x - margin * tx, seg->b.y - margin * ty};
    RefinedSide r = RefineSide(image, *coarse[i], a, b, std::max(8.0, 3.0 * wk.factor), linear,
                               m.edge_definition, &wk.valid, wk.factor);
    SideMeasurement& sm = m.side(s);
    const SideEvidence& ev = *best.sides[i];
    sm.confidence = SideConfidence(ev, range);
    // The refined line must stay near the coarse one along the part of it that was refined;
    // comparing the lines' offsets from the image origin instead would count any small change
    // of angle as a large shift on a field far from the origin.
    const double moved = r.ok ? std::max(std::fabs(r.line.SignedDistance(a)),
                                         std::fabs(r.line.SignedDistance(b)))
                              : 0.0;
    if (r.ok && moved < 4.0 * wk.factor + 0.05 * len) {
      refined[i] = r.line;
      sm.penumbra_px = r.penumbra_px;
      sm.contrast_ratio = r.contrast_ratio;
      sm.confidence *= std::clamp(0.5 + r.inlier_share, 0.0, 1.0);
      if (EdgeFollowsAnArc(image, wk, r, a, b, pixel_mm)) {
        arc_sides[i] = true;
        sm.confidence = std::min(sm.confidence, kArcSideConfidence);
        m.notes.push_back(std::string(SideName(s)) +
                          ": edge bows like an arc, possibly an anatomy outline and not a blade");
      }
      if (r.quarter_fallback) {
        m.notes.push_back(std::string(SideName(s)) +
                          ": blocked level above a quarter of the maximum, 50 % transition used");
      }
    } else {
      sm.contrast_ratio = linear ? std::exp(ev.step) : 0.0;
      sm.confidence *= 0.6;
      m.notes.push_back(std::string(SideName(s)) + ": edge kept at working resolution");
    }
    sm.visible = true;
  };
  for (Side s : kAllSides) {
    if (coarse[static_cast<int>(s)]) refine(s);
  }
  // Every edge found follows an arc: the outline of a round structure (gas over dense tissue,
  // a bright organ in an open image), not a collimated field. A single arc beside true blades
  // is kept: on small fields over round dense anatomy true blades bow too (docs/method.md).
  const bool only_arcs =
      std::any_of(refined.begin(), refined.end(), [](const auto& l) { return l.has_value(); }) &&
      std::all_of(kAllSides.begin(), kAllSides.end(), [&](Side s) {
        return !refined[static_cast<int>(s)] || arc_sides[static_cast<int>(s)];
      });
  if (only_arcs) {
    for (Side s : kAllSides) {
      const int i = static_cast<int>(s);
      if (!refined[i]) continue;
      refined[i].reset();
      coarse[i].reset();
      best.sides[i].reset();
      m.side(s) = SideMeasurement{};
      m.side(s).side = s;
    }
    m.notes.push_back("every edge found follows an arc: an anatomy outline, not a collimated field");
  }
  for (Side s : AddBladesNearBorder(image, prep, ctx, base, FieldAngle(refined, best.angle_deg),
                                    &best, &coarse)) {
    refine(s);
  }

  Polygon poly = base;
  for (const auto& l : refined) {
    if (l) poly = ClipHalfPlane(poly, *l);
  }
  if (poly.size() < 3 || Area(poly) < 1.0) {
    poly = base;
    for (const auto& l : coarse) if (l) poly = ClipHalfPlane(poly, *l);
  }
  MakeClockwise(poly);
  m.polygon_px = poly;
  m.area_px = Area(poly);
  if (ctx.spacing_mm) m.area_mm2 = m.area_px * (*ctx.spacing_mm)[0] * (*ctx.spacing_mm)[1];

  m.rotation_deg = FieldAngle(refined, best.angle_deg);
  m.open = std::none_of(refined.begin(), refined.end(), [](const auto& l) { return l.has_value(); });

  // Sides without a blade: beyond the receptor, blanked or cropped.
  const std::array<bool, 2> cropped_axes = CroppedAxes(image, ctx);
  const double ca = std::cos(best.angle_deg * kDeg), sa = std::sin(best.angle_deg * kDeg);
  for (Side s : kAllSides) {
    SideMeasurement& sm = m.side(s);
    const int i = static_cast<int>(s);
    if (refined[i]) {
      sm.line_px = LineInRegion(poly.size() >= 3 ? base : full, *refined[i]);
      Polygon others = base;
      for (Side o : kAllSides) {
        if (o != s && refined[static_cast<int>(o)]) others = ClipHalfPlane(others, *refined[static_cast<int>(o)]);
      }
      if (auto seg = LineInRegion(others, *refined[i])) sm.line_px = seg;
      continue;
    }
    const double nx[4] = {-ca, ca, sa, -sa}, ny[4] = {-sa, sa, -ca, ca};
    const Line dir{nx[i], ny[i], 0.0};
    const bool along_columns = std::fabs(dir.nx) >= std::fabs(dir.ny);
    if (only_arcs && arc_sides[i]) {
      sm.reason = "edge found follows an arc (an anatomy outline), not a blade shadow";
    } else if (blank.blanked && EndsAtMask(poly, dir, wk)) {
      sm.reason = "outside electronically blanked: the blade edge may be hidden under the mask";
      m.blanked_or_cropped_sides.push_back(s);
    } else if (cropped_axes[along_columns ? 1 : 0]) {
      sm.reason = "image cropped after exposure: the field reaches the cut border";
      m.blanked_or_cropped_sides.push_back(s);
    } else {
      sm.reason = "no blade shadow: the field extends beyond the image on this side";
    }
    sm.confidence = 0.8;
  }
  m.blanked = blank.blanked;
  if (m.blanked) m.notes.push_back("outside of the field electronically blanked (constant value)");
  m.cropped = cropped_axes[0] || cropped_axes[1];
  if (m.cropped) m.notes.push_back("image smaller than the receptor: cropped after exposure");

  // Second exposure on the plate.
  if (split) {
    m.double_exposure = true;
    m.notes.push_back("two exposed fields separated by a blocked band: possible double exposure; "
                      "the larger one is measured");
  } else if (opt.check_double_exposure && !m.open) {
    std::vector<double> outs, ins;
    for (const auto& ev : best.sides) {
      if (ev) { outs.push_back(ev->outside); ins.push_back(ev->inside); }
    }
    std::sort(outs.begin(), outs.end());
    std::sort(ins.begin(), ins.end());
    Polygon pw;
    for (const Point2d& q : poly) pw.push_back({q.x / wk.factor, q.y / wk.factor});
    std::string note;
    if (FindSecondExposure(wk, pw, outs.back(), ins[ins.size() / 2], &note)) {
      m.double_exposure = true;
      m.notes.push_back(note);
    }
  }

  double conf = 1.0;
  for (const SideMeasurement& sm : m.sides) conf = std::min(conf, sm.confidence);
  m.confidence = m.open ? 0.8 : conf;
  return m;
}

}  // namespace beamtrim
