// Rendering of synthetic QC exposures: a rectangular x-ray field with erf-shaped blade shadows,
// a heel-effect ramp, an optional flat attenuator, metal markers laid at the light field, and
// Poisson-like noise; raw linear or log-processed output. Truth is exact by construction.
#include <algorithm>
#include <cmath>
#include <random>

#include "beamtrim/synth_qc.h"

namespace beamtrim {
namespace {

constexpr double kTenNinetyToSigma = 2.0 * 1.2815515655446004;  // erf 10-90 % width / sigma
constexpr int kSupersample = 4;
// Processed output: value = kProcOffset + kProcGain * ln(v / open), clamped to 12 bits.
constexpr double kProcOffset = 2600.0;
constexpr double kProcGain = 500.0;

double Phi(double z) { return 0.5 * std::erfc(-z / std::sqrt(2.0)); }

// Inverse of the standard normal CDF by bisection: slow but obvious, used for truth only.
double PhiInverse(double p) {
  double lo = -12.0, hi = 12.0;
  for (int i = 0; i < 200; ++i) {
    double mid = 0.5 * (lo + hi);
    (Phi(mid) < p ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

// A metal marker as a set of rods (polyline of a given radius) or a disc.
struct MarkerShape {
  bool disc = false;
  Point2d centre;          // disc
  double radius_px = 0.0;  // disc or rod radius
  std::vector<Point2d> path;  // rod centre line
};

double DistanceToPath(const std::vector<Point2d>& path, Point2d p) {
  double best = 1e30;
  for (size_t i = 0; i + 1 < path.size(); ++i) {
    best = std::min(best, DistanceToSegment(p, Segment{path[i], path[i + 1]}));
  }
  return best;
}

// Metal path length through the marker at p, in mm.
double MetalLengthMm(const MarkerShape& m, Point2d p, double pixel_mm, double coin_mm) {
  if (m.disc) {
    double d = std::hypot(p.x - m.centre.x, p.y - m.centre.y);
    return d <= m.radius_px ? coin_mm : 0.0;
  }
  double d = DistanceToPath(m.path, p);
  if (d >= m.radius_px) return 0.0;
  return 2.0 * std::sqrt(m.radius_px * m.radius_px - d * d) * pixel_mm;
}

void RenderMarker(const MarkerShape& m, const QcExposureSpec& spec, Image* transmission) {
  double x0 = 1e30, y0 = 1e30, x1 = -1e30, y1 = -1e30;
  auto grow = [&](Point2d p, double r) {
    x0 = std::min(x0, p.x - r); x1 = std::max(x1, p.x + r);
    y0 = std::min(y0, p.y - r); y1 = std::max(y1, p.y + r);
  };
  if (m.disc) grow(m.centre, m.radius_px);
  for (const Point2d& p : m.path) grow(p, m.radius_px);
  int c0 = std::max(0, static_cast<int>(std::floor(x0)) - 1);
  int c1 = std::min(transmission->width() - 1, static_cast<int>(std::ceil(x1)) + 1);
  int r0 = std::max(0, static_cast<int>(std::floor(y0)) - 1);
  int r1 = std::min(transmission->height() - 1, static_cast<int>(std::ceil(y1)) + 1);
  for (int r = r0; r <= r1; ++r) {
    for (int c = c0; c <= c1; ++c) {
      double sum = 0.0;
      for (int sy = 0; sy < kSupersample; ++sy) {
        for (int sx = 0; sx < kSupersample; ++sx) {
          Point2d p{c + (sx + 0.5) / kSupersample, r + (sy + 0.5) / kSupersample};
          double len = MetalLengthMm(m, p, spec.pixel_mm, spec.coin_thickness_mm);
          sum += std::exp(-spec.marker_mu_per_mm * len);
        }
      }
      transmission->at(c, r) *= static_cast<float>(sum / (kSupersample * kSupersample));
    }
  }
}

// Marker centred at `centre`, its long axis along `dir` (unit vector), across = (-dir.y, dir.x).
MarkerShape MakeMarker(QcMarkerKind kind, Point2d centre, Point2d dir, double length_px,
                       const QcExposureSpec& spec) {
  MarkerShape m;
  double px = spec.pixel_mm;
  if (kind == QcMarkerKind::kCoin) {
    m.disc = true;
    m.centre = centre;
    m.radius_px = 0.5 * spec.coin_diameter_mm / px;
    return m;
  }
  m.radius_px = 0.5 * spec.rod_diameter_mm / px;
  Point2d across{-dir.y, dir.x};
  auto at = [&](double a, double b) {
    return Point2d{centre.x + a * dir.x + b * across.x, centre.y + a * dir.y + b * across.y};
  };
  if (kind == QcMarkerKind::kWire) {
    m.path = {at(-0.5 * length_px, 0.0), at(0.5 * length_px, 0.0)};
    return m;
  }
  // A clip: two legs 8 mm apart, 30 mm long, joined by a half circle; symmetric about the axis.
  double half_gap = 4.0 / px, len = 30.0 / px;
  m.path.push_back(at(-0.5 * len, -half_gap));
  m.path.push_back(at(0.5 * len - half_gap, -half_gap));
  for (int i = 1; i < 12; ++i) {
    double t = -M_PI / 2 + M_PI * i / 12.0;
    m.path.push_back(at(0.5 * len - half_gap + half_gap * std::cos(t), half_gap * std::sin(t)));
  }
  m.path.push_back(at(0.5 * len - half_gap, half_gap));
  m.path.push_back(at(-0.5 * len, half_gap));
  return m;
}

std::vector<MarkerShape> PlaceMarkers(const QcExposureSpec& spec, QcExposureTruth* truth) {
  double l = QcEdgeToPixel(spec, Side::kLeft, truth->light_mm[0]);
  double r = QcEdgeToPixel(spec, Side::kRight, truth->light_mm[1]);
  double t = QcEdgeToPixel(spec, Side::kTop, truth->light_mm[2]);
  double b = QcEdgeToPixel(spec, Side::kBottom, truth->light_mm[3]);
  double mx = 0.5 * (l + r), my = 0.5 * (t + b);
  std::vector<MarkerShape> out;
  if (spec.layout == QcMarkerLayout::kCorners) {
    for (Point2d p : {Point2d{l, t}, Point2d{r, t}, Point2d{r, b}, Point2d{l, b}}) {
      out.push_back(MakeMarker(QcMarkerKind::kCoin, p, {1.0, 0.0}, 0.0, spec));
      truth->marker_centres_px.push_back(p);
    }
    truth->edge_has_marker = {true, true, true, true};
    return out;
  }
  const Point2d centres[4] = {{l, my}, {r, my}, {mx, t}, {mx, b}};
  const Point2d dirs[4] = {{0.0, 1.0}, {0.0, -1.0}, {1.0, 0.0}, {-1.0, 0.0}};
  const double lengths[4] = {0.6 * (b - t), 0.6 * (b - t), 0.6 * (r - l), 0.6 * (r - l)};
  for (int s = 0; s < 4; ++s) {
    truth->edge_has_marker[s] = spec.marker_present[s];
    if (!spec.marker_present[s]) continue;
    out.push_back(MakeMarker(spec.kind, centres[s], dirs[s], lengths[s], spec));
    truth->marker_centres_px.push_back(centres[s]);
  }
  return out;
}

}  // namespace

const char* QcMarkerKindName(QcMarkerKind kind) {
  switch (kind) {
    case QcMarkerKind::kCoin: return "coin";
    case QcMarkerKind::kClip: return "clip";
    case QcMarkerKind::kWire: return "wire";
  }
  return "coin";
}

double QcEdgeToPixel(const QcExposureSpec& spec, Side side, double outward_mm) {
  double cx = 0.5 * spec.width, cy = 0.5 * spec.height;
  double d = outward_mm / spec.pixel_mm;
  switch (side) {
    case Side::kLeft: return cx - d;
    case Side::kRight: return cx + d;
    case Side::kTop: return cy - d;
    case Side::kBottom: return cy + d;
  }
  return cx;
}

double QcTruthEdgeMm(const QcExposureSpec& spec, Side side, EdgeDefinition definition) {
  double sigma_mm = spec.penumbra_mm / kTenNinetyToSigma;
  double b = spec.blocked_fraction;
  // Fraction of the step (0 blocked .. 1 open) at which the definition places the edge.
  double step_fraction = 0.5;
  if (spec.linear_raw && definition == EdgeDefinition::kQuarterMaximum) {
    step_fraction = (0.25 - b) / (1.0 - b);
  } else if (!spec.linear_raw) {
    // Halfway between the plateaus of the log-processed values: exposure sqrt(b) of open.
    step_fraction = (std::sqrt(b) - b) / (1.0 - b);
  }
  double inward_mm = sigma_mm * PhiInverse(step_fraction);
  return spec.xray_mm[static_cast<int>(side)] - inward_mm;
}

QcExposure MakeQcExposure(const QcExposureSpec& spec) {
  QcExposure out;
  out.linear = spec.linear_raw;
  out.pixel_mm = spec.pixel_mm;
  out.sid_mm = spec.sid_mm;
  QcExposureTruth& truth = out.truth;
  truth.xray_mm = spec.xray_mm;
  truth.offset_mm = spec.offset_mm;
  for (int s = 0; s < 4; ++s) truth.light_mm[s] = spec.xray_mm[s] - spec.offset_mm[s];

  Image transmission(spec.width, spec.height, 1.0f);
  for (const MarkerShape& m : PlaceMarkers(spec, &truth)) RenderMarker(m, spec, &transmission);

  double sigma_px = spec.penumbra_mm / kTenNinetyToSigma / spec.pixel_mm;
  double xl = QcEdgeToPixel(spec, Side::kLeft, spec.xray_mm[0]);
  double xr = QcEdgeToPixel(spec, Side::kRight, spec.xray_mm[1]);
  double yt = QcEdgeToPixel(spec, Side::kTop, spec.xray_mm[2]);
  double yb = QcEdgeToPixel(spec, Side::kBottom, spec.xray_mm[3]);
  std::vector<double> fx(spec.width);
  for (int c = 0; c < spec.width; ++c) {
    double x = c + 0.5;
    fx[c] = Phi((x - xl) / sigma_px) * Phi((xr - x) / sigma_px);
  }

  std::mt19937_64 rng(spec.seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  double b = spec.blocked_fraction;
  double open = spec.open_level * spec.phantom_transmission;
  out.image = Image(spec.width, spec.height);
  for (int r = 0; r < spec.height; ++r) {
    double y = r + 0.5;
    double fy = Phi((y - yt) / sigma_px) * Phi((yb - y) / sigma_px);
    double heel = 1.0 + spec.heel * (y / spec.height - 0.5);
    float* row = out.image.row(r);
    const float* trans = transmission.row(r);
    for (int c = 0; c < spec.width; ++c) {
      double v = open * heel * (b + (1.0 - b) * fx[c] * fy) * trans[c];
      v += spec.noise_rel * std::sqrt(v * spec.open_level) * normal(rng);
      v = std::max(v, 1.0);
      if (spec.linear_raw) {
        row[c] = static_cast<float>(std::min(std::round(v), 16383.0));
      } else {
        double p = kProcOffset + kProcGain * std::log(v / open);
        row[c] = static_cast<float>(std::clamp(std::round(p), 0.0, 4095.0));
      }
    }
  }
  return out;
}

}  // namespace beamtrim

namespace beamtrim {

QcExposureSpec DrawQcExposureSpec(uint64_t seed, int index) {
  std::mt19937_64 rng(seed * 0x9E3779B97F4A7C15ull + static_cast<uint64_t>(index) * 7919u + 17u);
  auto uniform = [&](double lo, double hi) { return std::uniform_real_distribution<double>(lo, hi)(rng); };
  auto pick = [&](int n) { return static_cast<int>(std::uniform_int_distribution<int>(0, n - 1)(rng)); };
  QcExposureSpec spec;
  spec.seed = seed * 1000003u + static_cast<uint64_t>(index);
  const double sids[3] = {1000.0, 1150.0, 1800.0};
  spec.sid_mm = sids[pick(3)];
  spec.pixel_mm = pick(2) == 0 ? 0.25 : 0.3;
  spec.width = static_cast<int>(350.0 / spec.pixel_mm);
  spec.height = static_cast<int>(430.0 / spec.pixel_mm);
  // Field a bit smaller than the receptor, not always centred.
  double half_w = uniform(90.0, 130.0), half_h = uniform(110.0, 160.0);
  double shift_x = uniform(-8.0, 8.0), shift_y = uniform(-8.0, 8.0);
  spec.xray_mm = {half_w - shift_x, half_w + shift_x, half_h - shift_y, half_h + shift_y};
  for (double& o : spec.offset_mm) o = uniform(-15.0, 15.0);
  spec.kind = static_cast<QcMarkerKind>(pick(3));
  spec.layout = pick(4) == 0 ? QcMarkerLayout::kCorners : QcMarkerLayout::kEdges;
  spec.coin_diameter_mm = uniform(16.0, 26.0);
  spec.rod_diameter_mm = uniform(0.8, 1.5);
  spec.penumbra_mm = uniform(0.8, 3.0);
  spec.blocked_fraction = uniform(0.02, 0.12);
  spec.phantom_transmission = pick(2) == 0 ? 1.0 : uniform(0.3, 0.8);
  spec.heel = uniform(0.0, 0.2);
  spec.noise_rel = uniform(0.005, 0.02);
  spec.linear_raw = pick(4) != 0;
  return spec;
}

}  // namespace beamtrim
