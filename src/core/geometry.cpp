#include "beamtrim/geometry.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace beamtrim {
namespace {

double Cross(Point2d o, Point2d a, Point2d b) {
  return (a.x - o.x) * (b.y - o.y) - (a.y - o.y) * (b.x - o.x);
}

// One Sutherland-Hodgman pass: keep the side where inside(p) holds.
template <class Inside, class Cut>
Polygon ClipAgainst(const Polygon& in, Inside inside, Cut cut) {
  Polygon out;
  if (in.empty()) return out;
  Point2d prev = in.back();
  bool prev_in = inside(prev);
  for (const Point2d& cur : in) {
    bool cur_in = inside(cur);
    if (cur_in != prev_in) out.push_back(cut(prev, cur));
    if (cur_in) out.push_back(cur);
    prev = cur;
    prev_in = cur_in;
  }
  return out;
}

Polygon ClipHalfPlane(const Polygon& in, const Line& keep_negative) {
  auto inside = [&](Point2d p) { return keep_negative.SignedDistance(p) <= 0.0; };
  auto cut = [&](Point2d p, Point2d q) {
    double dp = keep_negative.SignedDistance(p);
    double dq = keep_negative.SignedDistance(q);
    double t = dp / (dp - dq);
    return Point2d{p.x + t * (q.x - p.x), p.y + t * (q.y - p.y)};
  };
  return ClipAgainst(in, inside, cut);
}

double BoundaryToPolygon(Point2d p, const Polygon& poly) {
  double best = std::numeric_limits<double>::infinity();
  for (size_t i = 0; i < poly.size(); ++i) {
    best = std::min(best, DistanceToSegment(p, {poly[i], poly[(i + 1) % poly.size()]}));
  }
  return best;
}

double DirectedHausdorff(const Polygon& from, const Polygon& to, double step) {
  double worst = 0.0;
  for (size_t i = 0; i < from.size(); ++i) {
    Point2d a = from[i];
    Point2d b = from[(i + 1) % from.size()];
    double len = std::hypot(b.x - a.x, b.y - a.y);
    int n = std::max(1, static_cast<int>(std::ceil(len / step)));
    for (int k = 0; k < n; ++k) {
      double t = static_cast<double>(k) / n;
      worst = std::max(worst, BoundaryToPolygon({a.x + t * (b.x - a.x), a.y + t * (b.y - a.y)}, to));
    }
  }
  return worst;
}

}  // namespace

double SignedArea(const Polygon& polygon) {
  double twice = 0.0;
  for (size_t i = 0; i < polygon.size(); ++i) {
    const Point2d& p = polygon[i];
    const Point2d& q = polygon[(i + 1) % polygon.size()];
    twice += p.x * q.y - q.x * p.y;
  }
  return 0.5 * twice;
}

double Area(const Polygon& polygon) { return std::fabs(SignedArea(polygon)); }

void MakeClockwise(Polygon& polygon) {
  if (SignedArea(polygon) < 0.0) std::reverse(polygon.begin(), polygon.end());
}

Polygon ClipToRect(const Polygon& polygon, double width, double height) {
  Polygon out = ClipHalfPlane(polygon, Line{-1.0, 0.0, 0.0});   // x >= 0
  out = ClipHalfPlane(out, Line{1.0, 0.0, width});                // x <= width
  out = ClipHalfPlane(out, Line{0.0, -1.0, 0.0});                 // y >= 0
  out = ClipHalfPlane(out, Line{0.0, 1.0, height});               // y <= height
  return out;
}

Polygon ClipToConvex(const Polygon& subject, const Polygon& window) {
  Polygon win = window;
  MakeClockwise(win);
  Polygon out = subject;
  for (size_t i = 0; i < win.size() && !out.empty(); ++i) {
    Line edge = LineThrough(win[i], win[(i + 1) % win.size()]);
    // For a clockwise (screen) polygon the interior lies where the edge normal, as built by
    // LineThrough, points away; pick the half-plane that holds the window centroid.
    Point2d centre{0.0, 0.0};
    for (const Point2d& p : win) { centre.x += p.x / win.size(); centre.y += p.y / win.size(); }
    if (edge.SignedDistance(centre) > 0.0) edge = Line{-edge.nx, -edge.ny, -edge.c};
    out = ClipHalfPlane(out, edge);
  }
  return out;
}

Polygon ConvexHull(std::vector<Point2d> pts) {
  std::sort(pts.begin(), pts.end(), [](Point2d a, Point2d b) {
    return a.x < b.x || (a.x == b.x && a.y < b.y);
  });
  pts.erase(std::unique(pts.begin(), pts.end(),
                        [](Point2d a, Point2d b) { return a.x == b.x && a.y == b.y; }),
            pts.end());
  if (pts.size() < 3) return pts;
  Polygon hull(2 * pts.size());
  size_t k = 0;
  for (size_t i = 0; i < pts.size(); ++i) {
    while (k >= 2 && Cross(hull[k - 2], hull[k - 1], pts[i]) <= 0) --k;
    hull[k++] = pts[i];
  }
  for (size_t i = pts.size() - 1, t = k + 1; i > 0; --i) {
    while (k >= t && Cross(hull[k - 2], hull[k - 1], pts[i - 1]) <= 0) --k;
    hull[k++] = pts[i - 1];
  }
  hull.resize(k - 1);
  MakeClockwise(hull);
  return hull;
}

bool Intersect(const Line& a, const Line& b, Point2d* out) {
  double det = a.nx * b.ny - a.ny * b.nx;
  if (std::fabs(det) < 1e-12) return false;
  out->x = (a.c * b.ny - a.ny * b.c) / det;
  out->y = (a.nx * b.c - a.c * b.nx) / det;
  return true;
}

Line LineThrough(Point2d a, Point2d b) {
  double dx = b.x - a.x;
  double dy = b.y - a.y;
  double len = std::hypot(dx, dy);
  Line line{-dy / len, dx / len, 0.0};
  line.c = line.nx * a.x + line.ny * a.y;
  return line;
}

double DistanceToSegment(Point2d p, const Segment& s) {
  double dx = s.b.x - s.a.x;
  double dy = s.b.y - s.a.y;
  double len2 = dx * dx + dy * dy;
  double t = len2 > 0.0 ? ((p.x - s.a.x) * dx + (p.y - s.a.y) * dy) / len2 : 0.0;
  t = std::clamp(t, 0.0, 1.0);
  return std::hypot(p.x - (s.a.x + t * dx), p.y - (s.a.y + t * dy));
}

double HausdorffDistance(const Polygon& a, const Polygon& b, double step) {
  if (a.empty() || b.empty()) return std::numeric_limits<double>::infinity();
  return std::max(DirectedHausdorff(a, b, step), DirectedHausdorff(b, a, step));
}

bool Contains(const Polygon& polygon, Point2d p) {
  bool inside = false;
  for (size_t i = 0, j = polygon.size() - 1; i < polygon.size(); j = i++) {
    const Point2d& a = polygon[i];
    const Point2d& b = polygon[j];
    if (DistanceToSegment(p, {a, b}) < 1e-9) return true;
    if ((a.y > p.y) != (b.y > p.y) && p.x < (b.x - a.x) * (p.y - a.y) / (b.y - a.y) + a.x) {
      inside = !inside;
    }
  }
  return inside;
}

Polygon RectPolygon(double x0, double y0, double x1, double y1) {
  Polygon p{{x0, y0}, {x1, y0}, {x1, y1}, {x0, y1}};
  MakeClockwise(p);
  return p;
}

}  // namespace beamtrim
