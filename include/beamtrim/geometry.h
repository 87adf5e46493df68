// Plane geometry on image coordinates: points, segments, polygons.
// Coordinates are continuous pixels: x = column, y = row, (0, 0) the top-left corner of the
// top-left pixel, so pixel (c, r) covers [c, c+1) x [r, r+1). Polygons are vertex lists,
// closed implicitly. Pure functions on value types; thread-safe.
#pragma once

#include <array>
#include <vector>

namespace beamtrim {

struct Point2d {
  double x = 0.0;
  double y = 0.0;
};

struct Segment {
  Point2d a;
  Point2d b;
};

using Polygon = std::vector<Point2d>;

// Line in normal form: points p with n . p = c, with |n| = 1.
struct Line {
  double nx = 1.0;
  double ny = 0.0;
  double c = 0.0;
  double SignedDistance(Point2d p) const { return nx * p.x + ny * p.y - c; }
};

// Signed area by the shoelace formula: positive when the vertices run clockwise on screen
// (y down), which is the orientation beamtrim writes.
double SignedArea(const Polygon& polygon);
double Area(const Polygon& polygon);

// Reorders in place so that the polygon runs clockwise on screen (y down).
void MakeClockwise(Polygon& polygon);

// Sutherland-Hodgman clip of any polygon against the rectangle [0, width] x [0, height].
Polygon ClipToRect(const Polygon& polygon, double width, double height);

// Sutherland-Hodgman clip against a convex polygon `window`.
Polygon ClipToConvex(const Polygon& subject, const Polygon& window);

// Andrew's monotone chain convex hull, clockwise on screen.
Polygon ConvexHull(std::vector<Point2d> points);

// Intersection of two lines; false when (nearly) parallel.
bool Intersect(const Line& a, const Line& b, Point2d* out);

// Line through two distinct points.
Line LineThrough(Point2d a, Point2d b);

// Distance from p to the closed segment s.
double DistanceToSegment(Point2d p, const Segment& s);

// Symmetric Hausdorff distance between the boundaries of two polygons, in pixels, computed by
// sampling each boundary every `step` pixels (exact for the vertices).
double HausdorffDistance(const Polygon& a, const Polygon& b, double step = 0.25);

// True when p lies inside (or on) the polygon (even-odd rule).
bool Contains(const Polygon& polygon, Point2d p);

// The rectangle with corners (x0, y0), (x1, y1) as a clockwise polygon.
Polygon RectPolygon(double x0, double y0, double x1, double y1);

}  // namespace beamtrim
