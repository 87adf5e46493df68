// Anatomy box along the field axes, convex hull, full-resolution refinement of the box sides,
// and the blade edges the anatomy runs into (docs/metrics.md, "Anatomy").
#include "beamtrim/anatomy.h"

#include <algorithm>
#include <cmath>

#include <opencv2/imgproc.hpp>

#include "analysis/anatomy_internal.h"
#include "analysis/metrics_internal.h"

namespace beamtrim {
namespace {

using anatomy_internal::Segmentation;
using anatomy_internal::Working;
using metrics_internal::BoxExtents;
using metrics_internal::FieldFrame;

constexpr double kNominalPixelMm = 0.15;  // when the header gives no spacing

// Corners of the anatomy's boundary pixels, in full-resolution pixel coordinates.
std::vector<Point2d> BoundaryCorners(const cv::Mat& mask, const Working& w) {
  std::vector<std::vector<cv::Point>> contours;
  cv::findContours(mask.clone(), contours, cv::RETR_EXTERNAL, cv::CHAIN_APPROX_SIMPLE);
  std::vector<Point2d> out;
  for (const auto& c : contours) {
    for (const cv::Point& p : c) {
      for (int dy = 0; dy <= 1; ++dy) {
        for (int dx = 0; dx <= 1; ++dx) out.push_back({(p.x + dx) * w.fx, (p.y + dy) * w.fy});
      }
    }
  }
  return out;
}

// Log value of the 3x3 mean around a full-resolution pixel.
float LocalLog(const Image& image, int x, int y, bool linear) {
  float sum = 0.0f;
  int n = 0;
  for (int dy = -1; dy <= 1; ++dy) {
    int yy = std::clamp(y + dy, 0, image.height() - 1);
    for (int dx = -1; dx <= 1; ++dx) {
      sum += image.at(std::clamp(x + dx, 0, image.width() - 1), yy);
      ++n;
    }
  }
  float mean = sum / n;
  return anatomy_internal::ToLog(mean, linear);
}

// Inward-facing blade lines with the depth, in pixels, past which the penumbra is over.
struct Blade {
  Side side;
  Line line;      // oriented so that the field lies at positive distance
  double depth;   // 90 % point of the penumbra plus a margin
};

std::vector<Blade> VisibleBlades(const FieldMeasurement& field, const std::array<double, 2>& sp) {
  std::vector<Blade> out;
  Point2d centre{0.0, 0.0};
  for (const Point2d& p : field.polygon_px) {
    centre.x += p.x / field.polygon_px.size();
    centre.y += p.y / field.polygon_px.size();
  }
  for (const SideMeasurement& sm : field.sides) {
    if (!sm.visible || !sm.line_px) continue;
    Line line = LineThrough(sm.line_px->a, sm.line_px->b);
    if (line.SignedDistance(centre) < 0) line = Line{-line.nx, -line.ny, -line.c};
    double depth = 0.5 * sm.penumbra_px.value_or(2.0) + std::max(2.0, 1.0 / std::min(sp[0], sp[1]));
    out.push_back({sm.side, line, depth});
  }
  return out;
}

struct Refiner {
  const Image& image;
  const Working& w;
  const Segmentation& s;
  const FieldFrame& frame;
  bool linear;
  cv::Mat near;  // anatomy grown by three working pixels
  std::vector<Blade> blades;

  float Residual(int x, int y) const {
    double wx = (x + 0.5) / w.fx - 0.5, wy = (y + 0.5) / w.fy - 0.5;
    return static_cast<float>(anatomy_internal::LevelAt(s, wx, wy) -
                              LocalLog(image, x, y, linear));
  }
  bool Usable(int x, int y) const {
    int wx = std::min(static_cast<int>(x / w.fx), w.field.cols - 1);
    int wy = std::min(static_cast<int>(y / w.fy), w.field.rows - 1);
    if (!near.at<uchar>(wy, wx) || s.metal.at<uchar>(wy, wx)) return false;
    Point2d p{x + 0.5, y + 0.5};
    for (const Blade& b : blades) {
      if (b.line.SignedDistance(p) < b.depth) return false;
    }
    return true;
  }
};

// Noise of the full-resolution residual, from direct-exposure pixels.
double FullResolutionNoise(const Refiner& r) {
  std::vector<float> v;
  cv::Mat direct = (r.s.residual <= r.s.threshold) & r.w.field;
  std::vector<cv::Point> pts;
  cv::findNonZero(direct, pts);
  size_t stride = std::max<size_t>(1, pts.size() / 4000);
  for (size_t i = 0; i < pts.size(); i += stride) {
    int x = static_cast<int>((pts[i].x + 0.5) * r.w.fx), y = static_cast<int>((pts[i].y + 0.5) * r.w.fy);
    if (x < r.image.width() && y < r.image.height()) v.push_back(r.Residual(x, y));
  }
  if (v.size() < 10) return 0.0;
  auto mid = v.begin() + v.size() / 2;
  std::nth_element(v.begin(), mid, v.end());
  float med = *mid;
  for (float& x : v) x = std::fabs(x - med);
  std::nth_element(v.begin(), mid, v.end());
  return 1.4826 * *mid;
}

// Moves each box side to the outermost full-resolution tissue pixel within a band of a few
// working pixels around the coarse side.
void RefineSides(const Refiner& r, double threshold, BoxExtents& e) {
  const double band = 2.0 * std::max(r.w.fx, r.w.fy);
  for (Side side : kAllSides) {
    int k = static_cast<int>(side);
    bool upper = k == 1 || k == 3;
    double lo = upper ? e[k] - 2.0 * band : e[k] - 0.5 * band;
    double hi = upper ? e[k] + 0.5 * band : e[k] + 2.0 * band;
    // Image-space bounding box of the band (the band crosses the whole anatomy).
    double a0 = k < 2 ? lo : e[0], a1 = k < 2 ? hi : e[1];
    double b0 = k < 2 ? e[2] : lo, b1 = k < 2 ? e[3] : hi;
    std::array<Point2d, 4> c = {r.frame.From(a0, b0), r.frame.From(a1, b0),
                                r.frame.From(a1, b1), r.frame.From(a0, b1)};
    double x0 = 1e300, x1 = -1e300, y0 = 1e300, y1 = -1e300;
    for (const Point2d& p : c) {
      x0 = std::min(x0, p.x); x1 = std::max(x1, p.x);
      y0 = std::min(y0, p.y); y1 = std::max(y1, p.y);
    }
    int ix0 = std::max(0, static_cast<int>(x0)), ix1 = std::min(r.image.width() - 1, static_cast<int>(x1));
    int iy0 = std::max(0, static_cast<int>(y0)), iy1 = std::min(r.image.height() - 1, static_cast<int>(y1));
    double best = upper ? -1e300 : 1e300;
    for (int y = iy0; y <= iy1; ++y) {
      for (int x = ix0; x <= ix1; ++x) {
        Point2d p{x + 0.5, y + 0.5};
        double t = k < 2 ? r.frame.U(p) : r.frame.V(p);
        if (t < lo || t > hi || (upper ? t <= best : t >= best)) continue;
        if (!r.Usable(x, y) || r.Residual(x, y) <= threshold) continue;
        best = t;
      }
    }
    if (std::fabs(best) < 1e299) e[k] = upper ? best + 0.5 : best - 0.5;
  }
}

// Per visible blade edge, the longest run (mm, sampled every mm) along which tissue lies just
// past the penumbra. The anatomy runs into the blade where the run is at least 3 mm.
// Image processing (unsharp masking, equalisation) lightens everything within a centimetre or
// two of a blade edge, tissue included, by an amount that depends on the distance to the edge
// far more than on the position along it. The open-field level a sample is compared with is
// therefore taken along the same edge, at the same depth: the median of the samples within
// kEdgeWindowMm that the segmentation calls direct exposure. Where too few lie within reach,
// the local level of the segmentation is used (LevelAt). Without direct exposure the field
// lies within the body and every sample is tissue.
std::array<int, 4> BladeRuns(const FieldMeasurement& field, const Refiner& r,
                             const std::vector<Blade>& blades, double threshold,
                             const std::array<double, 2>& spacing) {
  constexpr double kEdgeWindowMm = 40.0;
  constexpr int kMinEdgeSamples = 5;
  std::array<int, 4> out{};
  const Working& w = r.w;
  double step_px = 1.0 / std::min(spacing[0], spacing[1]);  // 1 mm
  struct Sample {
    bool valid = false;   // inside the field, away from the corners
    bool direct = false;  // the segmentation's direct exposure a little further in
    bool metal = false;   // marker or shield left out of the anatomy
    float log = 0.0f;     // full-resolution log value just past the penumbra
    float level = 0.0f;   // open-field level there from the segmentation
  };
  for (const Blade& b : blades) {
    const Segment& seg = *field.side(b.side).line_px;
    double len = std::hypot(seg.b.x - seg.a.x, seg.b.y - seg.a.y);
    double deep = (w.erosion_px + 1.0) * std::max(w.fx, w.fy);
    int n = std::max(2, static_cast<int>(len / step_px));
    std::vector<Sample> samples(n + 1);
    for (int i = 0; i <= n; ++i) {
      double t = static_cast<double>(i) / n;
      Point2d p{seg.a.x + t * (seg.b.x - seg.a.x), seg.a.y + t * (seg.b.y - seg.a.y)};
      Point2d shallow{p.x + b.depth * b.line.nx, p.y + b.depth * b.line.ny};
      Point2d inner{p.x + deep * b.line.nx, p.y + deep * b.line.ny};
      int wx = static_cast<int>(inner.x / w.fx), wy = static_cast<int>(inner.y / w.fy);
      int sx = static_cast<int>(shallow.x), sy = static_cast<int>(shallow.y);
      if (wx < 0 || wy < 0 || wx >= w.field.cols || wy >= w.field.rows || !w.field.at<uchar>(wy, wx) ||
          sx < 0 || sy < 0 || sx >= r.image.width() || sy >= r.image.height()) {
        continue;
      }
      bool corner = false;
      for (const Blade& o : blades) corner = corner || o.line.SignedDistance(shallow) < o.depth - 1e-9;
      if (corner) continue;
      Sample& m = samples[i];
      m.valid = true;
      if (!r.s.direct_found) continue;
      m.direct = r.s.direct.at<uchar>(wy, wx) != 0;
      m.metal = r.s.metal.at<uchar>(wy, wx) != 0;
      m.log = LocalLog(r.image, sx, sy, r.linear);
      double lx = (sx + 0.5) / w.fx - 0.5, ly = (sy + 0.5) / w.fy - 0.5;
      m.level = static_cast<float>(anatomy_internal::LevelAt(r.s, lx, ly));
    }
    const int reach = static_cast<int>(std::lround(kEdgeWindowMm));
    int best = 0, run = 0;
    std::vector<float> near;
    for (int i = 0; i <= n; ++i) {
      const Sample& m = samples[i];
      bool hit = m.valid;
      if (hit && r.s.direct_found) {
        near.clear();
        for (int j = std::max(0, i - reach); j <= std::min(n, i + reach); ++j) {
          if (samples[j].valid && samples[j].direct && !samples[j].metal) near.push_back(samples[j].log);
        }
        double level = m.level;
        if (static_cast<int>(near.size()) >= kMinEdgeSamples) {
          auto mid = near.begin() + near.size() / 2;
          std::nth_element(near.begin(), mid, near.end());
          level = *mid;
        }
        hit = !m.metal && level - m.log > threshold;
      }
      run = hit ? run + 1 : 0;
      best = std::max(best, run);
    }
    out[static_cast<int>(b.side)] = best;
  }
  return out;
}

constexpr int kMinRunMm = 3;

// The field sides across the anatomy's long axis. The principal axis of the anatomy mask
// (second moments) when the mask is clearly elongated and does not fill the field; otherwise
// the structure tensor of the image over the anatomy (Bigun and Granlund 1987): bone cortices
// and limb outlines run along the long axis, so the dominant gradient lies across it.
std::optional<std::array<Side, 2>> EndsOf(const anatomy_internal::Segmentation& s,
                                          const Working& w, double rotation_deg) {
  cv::Moments m = cv::moments(s.anatomy, true);
  if (m.m00 < 10.0) return std::nullopt;
  double a = m.mu20 * w.fx * w.fx, b = m.mu11 * w.fx * w.fy, c = m.mu02 * w.fy * w.fy;
  double half = std::sqrt(0.25 * (a - c) * (a - c) + b * b);
  double l1 = 0.5 * (a + c) + half, l2 = 0.5 * (a + c) - half;
  double theta = 0.5 * std::atan2(2.0 * b, a - c);
  double fill = m.m00 / std::max(1, cv::countNonZero(w.field));
  if (!(l1 >= 1.5 * std::max(l2, 1e-9)) || fill > 0.9) {
    cv::Mat gx, gy;
    cv::Sobel(w.log, gx, CV_32F, 1, 0);
    cv::Sobel(w.log, gy, CV_32F, 0, 1);
    double jxx = 0.0, jyy = 0.0, jxy = 0.0;
    for (int y = 0; y < w.log.rows; ++y) {
      const uchar* mk = s.anatomy.ptr<uchar>(y);
      const float* px = gx.ptr<float>(y);
      const float* py = gy.ptr<float>(y);
      for (int x = 0; x < w.log.cols; ++x) {
        if (!mk[x]) continue;
        double u = px[x] / w.fx, v = py[x] / w.fy;
        jxx += u * u; jyy += v * v; jxy += u * v;
      }
    }
    double coherence = std::sqrt((jxx - jyy) * (jxx - jyy) + 4.0 * jxy * jxy) / std::max(jxx + jyy, 1e-12);
    if (coherence < 0.15) return std::nullopt;
    theta = 0.5 * std::atan2(2.0 * jxy, jxx - jyy) + 0.5 * M_PI;
  }
  double rel = theta - rotation_deg * M_PI / 180.0;
  if (std::fabs(std::cos(rel)) >= std::fabs(std::sin(rel))) {
    return std::array<Side, 2>{Side::kLeft, Side::kRight};  // long axis along the field's u
  }
  return std::array<Side, 2>{Side::kTop, Side::kBottom};
}

// The end a limb or the neck runs through: the end with the longer tissue run along the blade,
// if that run is at least 25 mm. Fingertips or toes cut by a blade give separate runs of about
// 2 cm or less; a forearm, a leg or the neck one run of several centimetres.
std::optional<Side> ContinuingEnd(const std::array<Side, 2>& ends, const std::array<int, 4>& runs) {
  constexpr int kLimbRunMm = 25;
  int k0 = static_cast<int>(ends[0]), k1 = static_cast<int>(ends[1]);
  int k = runs[k0] >= runs[k1] ? k0 : k1;
  if (runs[k] < kLimbRunMm) return std::nullopt;
  return static_cast<Side>(k);
}

}  // namespace

AnatomyMeasurement FindAnatomy(const Image& image, const FieldMeasurement& field,
                               const AnatomyContext& context, const AnatomyOptions& options,
                               std::vector<std::string>* notes) {
  AnatomyMeasurement out;
  if (image.empty() || field.polygon_px.size() < 3) return out;
  std::array<double, 2> spacing = context.spacing_mm.value_or(
      std::array<double, 2>{kNominalPixelMm, kNominalPixelMm});
  double working_mm = std::max(options.working_pixel_mm, std::max(spacing[0], spacing[1]));
  Working w = anatomy_internal::MakeWorking(image, field, spacing, context.linear, working_mm);
  Segmentation s = anatomy_internal::Segment(w, spacing, working_mm);
  if (notes && !s.direct_found && cv::countNonZero(w.field) > 0) {
    notes->push_back("no direct exposure inside the field: the anatomy fills the field");
  }
  if (notes && s.markers_removed > 0) {
    notes->push_back(std::to_string(s.markers_removed) +
                     " lead marker(s) or shield(s) left out of the anatomy");
  }
  if (cv::countNonZero(s.anatomy) == 0) return out;
  FieldFrame frame(field.rotation_deg);
  std::vector<Point2d> corners = BoundaryCorners(s.anatomy, w);
  BoxExtents e = metrics_internal::ExtentsOf(frame, corners);
  Refiner r{image, w, s, frame, context.linear, cv::Mat(), VisibleBlades(field, spacing)};
  cv::dilate(s.anatomy, r.near, cv::getStructuringElement(cv::MORPH_ELLIPSE, cv::Size(7, 7)));
  double threshold = s.threshold;
  if (s.direct_found) threshold = std::max(s.threshold, 5.0 * FullResolutionNoise(r));
  std::array<int, 4> runs = BladeRuns(field, r, r.blades, threshold, spacing);

  std::vector<Side> clipped;
  for (Side side : kAllSides) {
    if (runs[static_cast<int>(side)] >= kMinRunMm) clipped.push_back(side);
  }
  out.ends = EndsOf(s, w, field.rotation_deg);
  if (out.ends) out.continuing_end = ContinuingEnd(*out.ends, runs);
  if (options.refine && s.direct_found && threshold < 0.8 * s.tissue_level) {
    RefineSides(r, threshold, e);
  }
  // Clipped sides reach the blade; no side goes past the field.
  BoxExtents f = metrics_internal::ExtentsOf(frame, field.polygon_px);
  for (Side side : clipped) {
    int k = static_cast<int>(side);
    e[k] = f[k];
  }
  if (!s.direct_found) e = f;
  e[0] = std::max(e[0], f[0]);
  e[1] = std::min(e[1], f[1]);
  e[2] = std::max(e[2], f[2]);
  e[3] = std::min(e[3], f[3]);
  out.found = true;
  out.box_px = metrics_internal::BoxCorners(frame, e);
  out.hull_px = s.direct_found ? ConvexHull(corners) : field.polygon_px;
  double px_mm2 = w.fx * w.fy * spacing[0] * spacing[1];
  out.area_mm2 = s.direct_found ? cv::countNonZero(s.anatomy) * px_mm2
                                : (field.area_mm2 ? *field.area_mm2 : field.area_px * spacing[0] * spacing[1]);
  out.at_blade_sides = clipped;
  out.clipped_sides = clipped;  // no rule here: every edge the anatomy runs into
  if (!context.spacing_mm) out.area_mm2.reset();
  return out;
}

}  // namespace beamtrim
