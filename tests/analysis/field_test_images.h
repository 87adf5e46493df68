// Small synthetic radiographs for the field detector tests (synthetic ground truth: the field
// is drawn from known lines, so the truth is exact by construction). Each blade shadow is a
// linear penumbra ramp of known width whose 50 % point lies on the true line.
#pragma once

#include <algorithm>
#include <cmath>
#include <optional>
#include <random>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "beamtrim/field.h"
#include "beamtrim/geometry.h"
#include "beamtrim/image.h"

namespace beamtrim::testimg {

struct Blob {  // an ellipse of extra attenuation (anatomy, marker when strong)
  double cx, cy, rx, ry, transmission;
};
struct Band {  // a straight-edged band of tissue: x0 <= x <= x1 over all rows
  double x0, x1, transmission;
};

struct Spec {
  int width = 400, height = 360;
  double cx = 200, cy = 180;       // field centre, px
  double angle_deg = 0;            // positive clockwise on screen
  // Distance from centre to each edge along the field axes (left, right, top, bottom), px.
  std::array<double, 4> half = {120, 110, 100, 90};
  double penumbra = 4.0;           // full ramp width, px
  double blocked = 0.08;           // transmission under one blade
  double open = 1000.0;
  double heel = 0.0;               // relative fall-off from top to bottom
  double plateau_slope = 0.0;      // extra blocked signal falling with distance from the edge
  // The blocked level as one floor under all blades (scatter and glow dominate there), not a
  // product per blade: the corners where two blades overlap are no darker than the sides.
  bool floor_blocked = false;
  double noise = 0.0;              // Gaussian rms relative to the open level
  std::vector<Blob> blobs;
  std::vector<Band> bands;
  bool processed = false;          // log, then window to 0..1
  std::optional<Polygon> blank_outside;  // set everything outside this polygon to blank_value
  float blank_value = 0.0f;
  unsigned seed = 1;
};

inline double Ramp(double d, double width) {
  if (width <= 0) return d >= 0 ? 1.0 : 0.0;
  return std::clamp(d / width + 0.5, 0.0, 1.0);
}

// Side lines with outward normals, in pixel coordinates.
inline std::array<Line, 4> SideLines(const Spec& s) {
  const double a = s.angle_deg * M_PI / 180.0, c = std::cos(a), n = std::sin(a);
  const double u = s.cx * c + s.cy * n, v = -s.cx * n + s.cy * c;
  return {Line{-c, -n, -(u - s.half[0])}, Line{c, n, u + s.half[1]},
          Line{n, -c, -(v - s.half[2])}, Line{-n, c, v + s.half[3]}};
}

inline Polygon TruePolygon(const Spec& s) {
  Polygon p = RectPolygon(0, 0, s.width, s.height);
  for (const Line& l : SideLines(s)) {
    Polygon out;
    for (size_t i = 0; i < p.size(); ++i) {
      const Point2d a = p[i], b = p[(i + 1) % p.size()];
      const double da = l.SignedDistance(a), db = l.SignedDistance(b);
      if (da <= 0) out.push_back(a);
      if ((da <= 0) != (db <= 0)) {
        const double t = da / (da - db);
        out.push_back({a.x + t * (b.x - a.x), a.y + t * (b.y - a.y)});
      }
    }
    p = out;
  }
  MakeClockwise(p);
  return p;
}

inline Image Render(const Spec& s) {
  Image img(s.width, s.height);
  const auto lines = SideLines(s);
  std::mt19937 rng(s.seed);
  std::normal_distribution<double> gauss(0.0, 1.0);
  double vmin = 1e300, vmax = -1e300;
  for (int y = 0; y < s.height; ++y) {
    for (int x = 0; x < s.width; ++x) {
      const Point2d p{x + 0.5, y + 0.5};
      double t = 1.0, open = 1.0;
      for (const Line& l : lines) {
        const double d = -l.SignedDistance(p);  // positive inside
        double blocked = s.blocked;
        if (s.plateau_slope > 0 && d < 0) blocked += s.plateau_slope * std::exp(d / 60.0);
        t *= blocked + (1.0 - blocked) * Ramp(d, s.penumbra);
        open *= Ramp(d, s.penumbra);
      }
      if (s.floor_blocked) t = s.blocked + (1.0 - s.blocked) * open;
      for (const Blob& b : s.blobs) {
        const double q = std::pow((p.x - b.cx) / b.rx, 2) + std::pow((p.y - b.cy) / b.ry, 2);
        if (q <= 1.0) t *= b.transmission;
      }
      for (const Band& b : s.bands) {
        if (p.x >= b.x0 && p.x <= b.x1) t *= b.transmission;
      }
      double v = s.open * t * (1.0 - s.heel * p.y / s.height);
      if (s.noise > 0) v += s.noise * s.open * std::sqrt(std::max(t, 1e-3)) * gauss(rng);
      v = std::max(v, 1.0);
      if (s.processed) v = std::log(v);
      vmin = std::min(vmin, v);
      vmax = std::max(vmax, v);
      img.at(x, y) = static_cast<float>(v);
    }
  }
  if (s.processed) {
    for (int y = 0; y < s.height; ++y) {
      for (int x = 0; x < s.width; ++x) img.at(x, y) = float((img.at(x, y) - vmin) / (vmax - vmin));
    }
  }
  if (s.blank_outside) {
    for (int y = 0; y < s.height; ++y) {
      for (int x = 0; x < s.width; ++x) {
        if (!Contains(*s.blank_outside, {x + 0.5, y + 0.5})) img.at(x, y) = s.blank_value;
      }
    }
  }
  return img;
}

// Gradient magnitude of a working image as the detector computes it (Sobel, 1/8 scale).
inline cv::Mat1f GradientMagnitude(const cv::Mat1f& value) {
  cv::Mat1f gx, gy, mag;
  cv::Sobel(value, gx, CV_32F, 1, 0, 3, 1.0 / 8.0);
  cv::Sobel(value, gy, CV_32F, 0, 1, 3, 1.0 / 8.0);
  cv::magnitude(gx, gy, mag);
  return mag;
}

inline FieldContext Context(bool linear, double spacing = 0.5) {
  FieldContext c;
  c.linear = linear;
  c.spacing_mm = std::array<double, 2>{spacing, spacing};
  return c;
}

}  // namespace beamtrim::testimg
