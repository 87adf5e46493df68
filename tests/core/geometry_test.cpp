// Geometry primitives against OpenCV as an independent computation.
#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "beamtrim/geometry.h"

using namespace beamtrim;

namespace {
std::vector<cv::Point2f> ToCv(const Polygon& p) {
  std::vector<cv::Point2f> out;
  for (const Point2d& q : p) out.emplace_back(static_cast<float>(q.x), static_cast<float>(q.y));
  return out;
}
}  // namespace

TEST_CASE("PolygonAreaMatchesOpenCvContourArea") {
  // Reference: cv::contourArea (Green's formula), an independent implementation.
  Polygon p{{10, 10}, {200, 30}, {180, 150}, {40, 120}, {5, 60}};
  CHECK(Area(p) == doctest::Approx(cv::contourArea(ToCv(p))).epsilon(1e-6));
}

TEST_CASE("ClockwiseOnScreenHasPositiveSignedArea") {
  // Screen coordinates, y down: right then down is clockwise as seen (common practice).
  Polygon p{{0, 0}, {4, 0}, {4, 3}, {0, 3}};
  CHECK(SignedArea(p) == doctest::Approx(12.0));
  std::reverse(p.begin(), p.end());
  MakeClockwise(p);
  CHECK(SignedArea(p) == doctest::Approx(12.0));
}

TEST_CASE("ClipToRectMatchesOpenCvConvexIntersection") {
  // A 30-degree rotated square partly outside a 100 x 80 image; reference:
  // cv::intersectConvexConvex.
  Polygon sq;
  double c = std::cos(M_PI / 6), s = std::sin(M_PI / 6);
  for (auto [u, v] : std::vector<std::pair<double, double>>{{-40, -40}, {40, -40}, {40, 40}, {-40, 40}}) {
    sq.push_back({90 + c * u - s * v, 20 + s * u + c * v});
  }
  Polygon clipped = ClipToRect(sq, 100, 80);
  std::vector<cv::Point2f> inter;
  float ref = cv::intersectConvexConvex(ToCv(sq), ToCv(RectPolygon(0, 0, 100, 80)), inter);
  CHECK(Area(clipped) == doctest::Approx(ref).epsilon(1e-4));
}

TEST_CASE("ConvexHullMatchesOpenCv") {
  std::vector<Point2d> pts{{0, 0}, {10, 1}, {5, 5}, {9, 9}, {1, 10}, {3, 3}, {7, 2}};
  Polygon hull = ConvexHull(pts);
  std::vector<cv::Point2f> ref;
  cv::convexHull(ToCv(pts), ref);
  CHECK(hull.size() == ref.size());
  CHECK(Area(hull) == doctest::Approx(cv::contourArea(ref)));
}

TEST_CASE("HausdorffOfShiftedRectangleIsTheShift") {
  // Two axis-aligned rectangles, one moved 3 px right: every boundary point is within 3 px.
  Polygon a = RectPolygon(10, 10, 50, 40);
  Polygon b = RectPolygon(13, 10, 53, 40);
  CHECK(HausdorffDistance(a, b) == doctest::Approx(3.0));
}

TEST_CASE("LineIntersectionOfPerpendicularLines") {
  Line v = LineThrough({5, 0}, {5, 10});
  Line h = LineThrough({0, 7}, {10, 7});
  Point2d p;
  REQUIRE(Intersect(v, h, &p));
  CHECK(p.x == doctest::Approx(5));
  CHECK(p.y == doctest::Approx(7));
}
