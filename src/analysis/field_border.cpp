// A blade shadow a few millimetres inside the image border. At the working resolution (about
// 2 mm) its blocked plateau is one to four pixels wide, narrower than the strips the rectangle
// search compares, so it is searched here at full resolution: the strip along the border is cut
// into short segments, each segment's mean depth profile is tested for a dark plateau that
// starts at the border and ends in one clear rise, and the rises must lie on one straight line
// parallel to the field. docs/method.md, "Blades close to the image border".
#include <algorithm>
#include <cmath>
#include <vector>

#include "analysis/field_internal.h"

namespace beamtrim::field_internal {
namespace {

constexpr double kDeg = M_PI / 180.0;

// Pixel of a side's border strip at along-edge index t and depth d (0 at the image border,
// growing into the image).
struct StripGeometry {
  Side side;
  int width, height;
  int along() const { return side == Side::kTop || side == Side::kBottom ? width : height; }
  int across() const { return side == Side::kTop || side == Side::kBottom ? height : width; }
  int X(int t, int d) const {
    switch (side) {
      case Side::kLeft: return d;
      case Side::kRight: return width - 1 - d;
      default: return t;
    }
  }
  int Y(int t, int d) const {
    switch (side) {
      case Side::kTop: return d;
      case Side::kBottom: return height - 1 - d;
      default: return t;
    }
  }
};

// One segment's edge: the rise from the plateau at the border to the field.
struct SegmentEdge {
  double t = 0.0;        // along-edge centre of the segment, full pixels
  double depth = 0.0;    // 50 % crossing, full pixels from the border (continuous)
  double outside = 0.0;  // plateau level between the border and the rise
  double inside = 0.0;   // level just inside the rise
  double spread = 0.0;   // max - min of the plateau
};

// The segment's edge on a mean depth profile (working value units), or nothing when the
// profile has no rise after a plateau of at least `min_plateau` pixels.
std::optional<SegmentEdge> EdgeOnProfile(const std::vector<double>& p, int min_plateau, int gap,
                                         int band) {
  const int n = static_cast<int>(p.size());
  // The rise: the largest difference across 2 * gap pixels, searched where a plateau of
  // `min_plateau` pixels lies before it and a band of `band` pixels after it.
  int best = -1;
  double best_rise = 0.0;
  for (int y = min_plateau + gap; y + gap + band <= n; ++y) {
    const double rise = p[y + gap - 1] - p[y - gap];
    if (rise > best_rise) { best_rise = rise; best = y; }
  }
  if (best < 0) return std::nullopt;
  SegmentEdge e;
  std::vector<double> plateau(p.begin(), p.begin() + (best - gap));
  std::vector<double> open(p.begin() + best + gap, p.begin() + best + gap + band);
  e.outside = MedianOf(plateau);
  e.inside = MedianOf(open);
  const auto [mn, mx] = std::minmax_element(plateau.begin(), plateau.end());
  e.spread = *mx - *mn;
  if (!(e.inside > e.outside)) return std::nullopt;
  // 50 % crossing nearest to the rise, linearly interpolated between pixel centres.
  const double half = 0.5 * (e.outside + e.inside);
  int k = best;
  while (k > best - gap && p[k - 1] >= half) --k;
  while (k < best + gap && p[k] < half) ++k;
  if (k <= 0 || k >= n) return std::nullopt;
  const double a = p[k - 1], b = p[k];
  const double f = b > a ? std::clamp((half - a) / (b - a), 0.0, 1.0) : 0.5;
  e.depth = (k - 1) + 0.5 + f;
  return e;
}

}  // namespace

std::optional<BorderBlade> FindBladeNearBorder(const Image& image, const WorkingImage& wk,
                                               const BorderSearch& in) {
  const StripGeometry g{in.side, image.width(), image.height()};
  const double pitch = in.pitch_mm > 0.0 ? in.pitch_mm : 430.0 / std::max(image.width(), image.height());
  auto px = [&](double mm) { return std::max(1, static_cast<int>(std::lround(mm / pitch))); };
  const int depth = std::min(px(kBorderSearchMm), g.across() / 4);
  const int min_plateau = std::max(2, px(1.0));
  const int gap = std::max(1, px(1.0));     // half of the penumbra allowance
  const int band = std::max(3, px(4.0));    // the open level just inside the rise
  const int seg_len = std::max(4, px(10.0));
  if (depth < min_plateau + 2 * gap + band) return std::nullopt;

  const int t_lo = std::max(0, static_cast<int>(std::ceil(in.along_lo)));
  const int t_hi = std::min(g.along(), static_cast<int>(std::floor(in.along_hi)));
  std::vector<SegmentEdge> edges;
  int usable = 0;
  std::vector<double> sum(depth), profile(depth);
  for (int s0 = t_lo; s0 + seg_len <= t_hi; s0 += seg_len) {
    std::fill(sum.begin(), sum.end(), 0.0);
    bool valid = true;
    for (int d = 0; d < depth && valid; ++d) {
      for (int t = s0; t < s0 + seg_len; ++t) {
        const int x = g.X(t, d), y = g.Y(t, d);
        if (!wk.valid(std::min(y / wk.factor, wk.valid.rows - 1), std::min(x / wk.factor, wk.valid.cols - 1))) {
          valid = false;
          break;
        }
        sum[d] += image.at(x, y);
      }
    }
    if (!valid) continue;
    ++usable;
    for (int d = 0; d < depth; ++d) profile[d] = WorkingValue(wk, sum[d] / seg_len);
    auto e = EdgeOnProfile(profile, min_plateau, gap, band);
    if (!e) continue;
    e->t = s0 + 0.5 * seg_len;
    edges.push_back(*e);
  }
  if (usable < 5) return std::nullopt;

  // Segments with a clear rise after a flat plateau. The steps are compared with the strong
  // ones of this side: beside dense anatomy the rise is smaller but still at the same place.
  std::vector<double> steps;
  for (const auto& e : edges) steps.push_back(e.inside - e.outside);
  std::sort(steps.begin(), steps.end());
  if (steps.empty()) return std::nullopt;
  const double strong = steps[(3 * steps.size()) / 4];
  if (strong < kMinRelativeStep * in.range) return std::nullopt;
  std::vector<Point2d> pts;
  std::vector<const SegmentEdge*> kept;
  for (const auto& e : edges) {
    const double step = e.inside - e.outside;
    if (step < 0.25 * strong || e.spread > 0.35 * step) continue;
    pts.push_back({e.t, e.depth});
    kept.push_back(&e);
  }
  if (static_cast<int>(pts.size()) < 5) return std::nullopt;

  // One straight line through the rises (depth against along-edge position).
  std::vector<double> depths;
  for (const auto& p : pts) depths.push_back(p.y);
  const Line start{0.0, 1.0, MedianOf(depths)};
  const Line fit = RobustLineFit(pts, start, std::max(1.0, 0.5 / pitch));
  const double tol = std::max(1.5, 1.0 / pitch);
  std::vector<double> outs, ins;
  int inliers = 0;
  for (size_t i = 0; i < pts.size(); ++i) {
    if (std::fabs(fit.SignedDistance(pts[i])) > tol) continue;
    ++inliers;
    outs.push_back(kept[i]->outside);
    ins.push_back(kept[i]->inside);
  }
  const double support = static_cast<double>(inliers) / usable;
  if (support < kMinBorderSupport) return std::nullopt;
  // Parallel to the field (the blades of one collimator are square to each other).
  const double slope_deg = std::atan2(-fit.nx, fit.ny) / kDeg;  // depth change along t
  double expected = 0.0;
  switch (in.side) {  // depth grows into the image: the field angle's sign per side
    case Side::kTop: expected = in.angle_deg; break;
    case Side::kBottom: expected = -in.angle_deg; break;
    case Side::kLeft: expected = -in.angle_deg; break;
    case Side::kRight: expected = in.angle_deg; break;
  }
  if (std::fabs(slope_deg - expected) > kBorderAngleTolDeg) return std::nullopt;

  BorderBlade out;
  SideEvidence& ev = out.evidence;
  ev.outside = MedianOf(outs);
  ev.inside = MedianOf(ins);
  ev.step = ev.inside - ev.outside;
  ev.support = support;
  ev.coverage = support;
  ev.blade = true;
  // The plateau must be as dark as a blade's: level with the blocked plateau of the sides
  // found, or, with none, not the bright plateau of an anatomy outline (DropInconsistent).
  if (in.blocked) {
    if (ev.outside > *in.blocked + 0.5 * (ev.inside - *in.blocked)) return std::nullopt;
  } else if (AnatomyOutlinePlateau(ev.outside, ev.step, in.lo, in.range)) {
    return std::nullopt;
  }
  // Back to image coordinates: depth = a + b t with the line's normal out of the field.
  const double b = -fit.nx / fit.ny;
  const double a = fit.c / fit.ny;
  const Point2d p0{static_cast<double>(t_lo), a + b * t_lo};
  const Point2d p1{static_cast<double>(t_hi), a + b * t_hi};
  auto to_image = [&](Point2d q) -> Point2d {
    switch (in.side) {
      case Side::kLeft: return {q.y, q.x};
      case Side::kRight: return {image.width() - q.y, q.x};
      case Side::kTop: return {q.x, q.y};
      case Side::kBottom: return {q.x, image.height() - q.y};
    }
    return q;
  };
  Line line = LineThrough(to_image(p0), to_image(p1));
  // Outward: towards the border, where a point at depth 0 lies.
  const Point2d border_point = to_image({0.5 * (t_lo + t_hi), 0.0});
  if (line.SignedDistance(border_point) < 0.0) line = Line{-line.nx, -line.ny, -line.c};
  out.line = line;
  return out;
}

}  // namespace beamtrim::field_internal
