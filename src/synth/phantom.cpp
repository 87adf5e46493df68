// Phantom primitives: path lengths (for Beer-Lambert attenuation) and tissue outlines.
#include "synth/phantom.h"

#include <algorithm>
#include <cmath>

namespace beamtrim::synth_internal {
namespace {

constexpr double kPi = 3.14159265358979323846;

// Chord through a sphere-like profile: 2 sqrt(r^2 - d^2), zero outside.
double Chord(double r, double d2) {
  double k = r * r - d2;
  return k > 0.0 ? 2.0 * std::sqrt(k) : 0.0;
}

// Squared distance from p to the segment p0-p1 (capsule core).
double SegmentDistance2(double x, double y, Point2d p0, Point2d p1) {
  double dx = p1.x - p0.x, dy = p1.y - p0.y;
  double len2 = dx * dx + dy * dy;
  double t = len2 > 0.0 ? ((x - p0.x) * dx + (y - p0.y) * dy) / len2 : 0.0;
  t = std::clamp(t, 0.0, 1.0);
  double ex = x - (p0.x + t * dx), ey = y - (p0.y + t * dy);
  return ex * ex + ey * ey;
}

// Vertices needed so that an inscribed polygon stays within 0.01 mm of a circle of radius r.
int SamplesFor(double r) {
  int n = static_cast<int>(std::ceil(kPi * std::sqrt(std::max(r, 1.0) / 0.02)));
  return std::clamp(n, 32, 4096);
}

}  // namespace

double Mu(Material material, double kvp) {
  // Effective energy falls with kVp; soft tissue (Compton dominated) changes slowly, bone and
  // metals (photoelectric) faster. Reference point 75 kVp ~ 30-40 keV mean... the exponents
  // are a modelling choice (common practice, no single source), values at 75 kVp from memory
  // of NIST XCOM: soft 0.021/mm, lung 0.3 g/cm3, cortical bone 0.06/mm, steel 1.0/mm, lead 5/mm.
  double e = 75.0 / std::clamp(kvp, 40.0, 150.0);
  double soft = 0.021 * std::pow(e, 0.35);
  double bone = 0.060 * std::pow(e, 1.2);
  switch (material) {
    case Material::kSoft: return soft;
    case Material::kLungDelta: return -0.7 * soft;   // lung replaces soft tissue
    case Material::kGasDelta: return -soft;          // bowel gas replaces soft tissue
    case Material::kBone: return bone - soft;        // bone replaces soft tissue
    case Material::kMarrowDelta: return 0.0;
    case Material::kSteel: return 1.0 * std::pow(e, 1.5);
    case Material::kLead: return 5.0 * std::pow(e, 1.0);
  }
  return soft;
}

void Primitive::Finish() {
  switch (kind) {
    case Kind::kEllipsoid: {
      double ca = std::cos(angle), sa = std::sin(angle);
      double hx = std::sqrt(a * a * ca * ca + b * b * sa * sa);
      double hy = std::sqrt(a * a * sa * sa + b * b * ca * ca);
      x0 = centre.x - hx; x1 = centre.x + hx; y0 = centre.y - hy; y1 = centre.y + hy;
      break;
    }
    case Kind::kRod:
    case Kind::kTube:
      x0 = std::min(p0.x, p1.x) - r; x1 = std::max(p0.x, p1.x) + r;
      y0 = std::min(p0.y, p1.y) - r; y1 = std::max(p0.y, p1.y) + r;
      break;
    case Kind::kSlab:
      x0 = y0 = 1e300; x1 = y1 = -1e300;
      for (const Point2d& p : polygon) {
        x0 = std::min(x0, p.x); x1 = std::max(x1, p.x);
        y0 = std::min(y0, p.y); y1 = std::max(y1, p.y);
      }
      break;
  }
}

double Primitive::PathLength(double x, double y) const {
  if (x < x0 || x > x1 || y < y0 || y > y1) return 0.0;
  switch (kind) {
    case Kind::kEllipsoid: {
      double dx = x - centre.x, dy = y - centre.y;
      double ca = std::cos(angle), sa = std::sin(angle);
      double u = (dx * ca + dy * sa) / a, v = (-dx * sa + dy * ca) / b;
      double q = u * u + v * v;
      return q < 1.0 ? 2.0 * c * std::sqrt(1.0 - q) : 0.0;
    }
    case Kind::kRod:
      return Chord(r, SegmentDistance2(x, y, p0, p1));
    case Kind::kTube: {
      double d2 = SegmentDistance2(x, y, p0, p1);
      return Chord(r, d2) - Chord(r_inner, d2);
    }
    case Kind::kSlab:
      return Contains(polygon, {x, y}) ? thickness : 0.0;
  }
  return 0.0;
}

Polygon Primitive::Outline() const {
  Polygon out;
  switch (kind) {
    case Kind::kEllipsoid: {
      int n = SamplesFor(std::max(a, b));
      double ca = std::cos(angle), sa = std::sin(angle);
      for (int i = 0; i < n; ++i) {
        double t = 2.0 * kPi * i / n;
        double u = a * std::cos(t), v = b * std::sin(t);
        out.push_back({centre.x + u * ca - v * sa, centre.y + u * sa + v * ca});
      }
      break;
    }
    case Kind::kRod:
    case Kind::kTube: {
      // Capsule: a half circle around each end joined by the straight sides.
      double dir = std::atan2(p1.y - p0.y, p1.x - p0.x);
      int n = SamplesFor(r) / 2;
      for (int i = 0; i <= n; ++i) {
        double t = dir - kPi / 2 + kPi * i / n;
        out.push_back({p1.x + r * std::cos(t), p1.y + r * std::sin(t)});
      }
      for (int i = 0; i <= n; ++i) {
        double t = dir + kPi / 2 + kPi * i / n;
        out.push_back({p0.x + r * std::cos(t), p0.y + r * std::sin(t)});
      }
      break;
    }
    case Kind::kSlab:
      out = polygon;
      break;
  }
  MakeClockwise(out);
  return out;
}

double Phantom::LineIntegral(double x, double y, double kvp) const {
  // Overlapping tissue envelopes (a finger on the palm, the thigh into the knee) form one
  // body, so their path lengths combine by the maximum rather than adding up.
  double sum = 0.0, envelope = 0.0;
  for (const Primitive& p : parts) {
    double t = p.PathLength(x, y) * p.weight;
    if (t == 0.0) continue;
    if (p.tissue) {
      envelope = std::max(envelope, t);
    } else {
      sum += Mu(p.material, kvp) * t;
    }
  }
  return std::max(sum + Mu(Material::kSoft, kvp) * envelope, 0.0);
}

double Phantom::TissueThickness(double x, double y) const {
  double t = 0.0;
  for (const Primitive& p : parts) {
    if (p.tissue) t = std::max(t, p.PathLength(x, y) * p.weight);
  }
  return t;
}

std::vector<Polygon> Phantom::TissueOutlines() const {
  std::vector<Polygon> out;
  for (const Primitive& p : parts) {
    if (p.tissue) out.push_back(p.Outline());
  }
  return out;
}

}  // namespace beamtrim::synth_internal
