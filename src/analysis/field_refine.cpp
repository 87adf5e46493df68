// Sub-pixel refinement of a blade edge at full resolution: intensity profiles across the coarse
// line at many positions along it, the edge located on each profile, then a robust line fit.
// Only narrow bands around the edges are read.
#include <algorithm>
#include <cmath>
#include <vector>

#include <Eigen/Dense>

#include "analysis/field_internal.h"

namespace beamtrim::field_internal {
namespace {

double MedianRange(const std::vector<double>& p, int a, int b) {
  a = std::max(a, 0);
  b = std::min(b, static_cast<int>(p.size()));
  if (b <= a) return std::nan("");
  return MedianOf(std::vector<double>(p.begin() + a, p.begin() + b));
}

// Crossing of `level` by the rising profile nearest to index `from` (continuous index).
std::optional<double> NearestCrossing(const std::vector<double>& p, int from, double level) {
  const int n = static_cast<int>(p.size());
  for (int d = 0; d < n; ++d) {
    for (int j : {from + d, from - d - 1}) {
      if (j < 0 || j + 1 >= n) continue;
      if (p[j] <= level && p[j + 1] > level) return j + (level - p[j]) / (p[j + 1] - p[j]);
    }
  }
  return std::nullopt;
}

}  // namespace

double SampleBilinear(const Image& image, double x, double y) {
  const double fx = std::clamp(x - 0.5, 0.0, image.width() - 1.0);
  const double fy = std::clamp(y - 0.5, 0.0, image.height() - 1.0);
  const int x0 = std::min(static_cast<int>(fx), image.width() - 2 < 0 ? 0 : image.width() - 2);
  const int y0 = std::min(static_cast<int>(fy), image.height() - 2 < 0 ? 0 : image.height() - 2);
  const int x1 = std::min(x0 + 1, image.width() - 1);
  const int y1 = std::min(y0 + 1, image.height() - 1);
  const double ax = fx - x0, ay = fy - y0;
  const double top = image.at(x0, y0) * (1 - ax) + image.at(x1, y0) * ax;
  const double bottom = image.at(x0, y1) * (1 - ax) + image.at(x1, y1) * ax;
  return top * (1 - ay) + bottom * ay;
}

namespace {

// The blocked and open levels next to the transition and the steepest rise of a profile.
struct Transition {
  int steepest = -1;
  double low = 0.0;
  double high = 0.0;
};

std::optional<Transition> FindTransition(const std::vector<double>& p) {
  const int n = static_cast<int>(p.size());
  if (n < 8) return std::nullopt;
  Transition t;
  // Steepest rise on a lightly smoothed derivative.
  double best = 0.0;
  for (int i = 2; i + 2 < n; ++i) {
    const double d = (p[i + 2] + p[i + 1]) - (p[i - 1] + p[i - 2]);
    if (d > best) { best = d; t.steepest = i; }
  }
  if (t.steepest < 0) return std::nullopt;
  // First levels from the profile ends, then from windows just beyond the transition.
  const int quarter = std::max(2, n / 5);
  t.low = MedianRange(p, 0, quarter);
  t.high = MedianRange(p, n - quarter, n);
  for (int iter = 0; iter < 2; ++iter) {
    if (!(t.high > t.low)) return std::nullopt;
    auto c10 = NearestCrossing(p, t.steepest, t.low + 0.1 * (t.high - t.low));
    auto c90 = NearestCrossing(p, t.steepest, t.low + 0.9 * (t.high - t.low));
    if (!c10 || !c90) return std::nullopt;
    const double width = std::max(1.0, *c90 - *c10);
    const int window = std::max(4, static_cast<int>(width));
    const int a = static_cast<int>(std::floor(*c10 - 0.5 * width));
    const int b = static_cast<int>(std::ceil(*c90 + 0.5 * width));
    const double l = MedianRange(p, a - window, a);
    const double h = MedianRange(p, b + 1, b + 1 + window);
    if (std::isnan(l) || std::isnan(h)) break;  // keep the levels from the ends
    t.low = l;
    t.high = h;
  }
  if (!(t.high > t.low)) return std::nullopt;
  return t;
}

// Display fraction q (0 at the blocked level, 1 at the open level) at which the exposure
// fraction is f, when the display value is affine in log exposure and the open level is e^k
// times the blocked one (k = 0: display proportional to exposure).
double DisplayFractionOfExposure(double f, double k) {
  if (std::fabs(k) < 1e-9) return f;
  return std::log1p(f * std::expm1(k)) / k;
}

}  // namespace

EdgeCrossing LocateCrossing(const std::vector<double>& p, double step, double fraction,
                            std::optional<double> absolute_level) {
  EdgeCrossing out;
  const auto t = FindTransition(p);
  if (!t) return out;
  const double low = t->low, high = t->high;
  const double level = absolute_level ? *absolute_level : low + fraction * (high - low);
  const int n = static_cast<int>(p.size());
  auto c = NearestCrossing(p, t->steepest, level);
  auto c10 = NearestCrossing(p, t->steepest, low + 0.1 * (high - low));
  auto c90 = NearestCrossing(p, t->steepest, low + 0.9 * (high - low));
  if (!c || !c10 || !c90) return out;
  out.offset = (*c - 0.5 * (n - 1)) * step;
  out.span_centre = (0.5 * (*c10 + *c90) - 0.5 * (n - 1)) * step;
  out.low = low;
  out.high = high;
  out.penumbra = std::max(0.0, *c90 - *c10) * step;
  out.ok = true;
  return out;
}

namespace {

struct GainTry {
  double k = 0.0;          // display gain: the open level is e^k times the blocked one
  double asymmetry = 0.0;  // (c50 - c25) - (c75 - c50), profile samples
  double centre = 0.0;     // the 50 % exposure crossing, profile samples
};

// How far a profile's transition is from point symmetry about its 50 % exposure point when
// the display is taken as affine in log exposure with gain k. A symmetric blur of the blade
// shadow is point-symmetric in exposure.
class SymmetryProbe {
 public:
  explicit SymmetryProbe(const std::vector<double>& p) : p_(p), t_(FindTransition(p)) {}
  bool usable() const { return t_.has_value(); }
  std::optional<GainTry> At(double k) const {
    auto at = [&](double f) {
      return NearestCrossing(p_, t_->steepest,
                             t_->low + DisplayFractionOfExposure(f, k) * (t_->high - t_->low));
    };
    const auto c25 = at(0.25), c50 = at(0.5), c75 = at(0.75);
    if (!c25 || !c50 || !c75) return std::nullopt;
    return GainTry{k, (*c50 - *c25) - (*c75 - *c50), *c50};
  }
  // The first gain in [from, to], in steps of `by`, at which the asymmetry turns from negative
  // to non-negative, with the usable tries on either side.
  std::optional<std::pair<GainTry, GainTry>> FirstTurn(double from, double to, double by) const {
    std::optional<GainTry> previous;
    for (double k = from; k <= to + 1e-9; k += by) {
      const auto now = At(k);
      if (now && previous && previous->asymmetry < 0.0 && now->asymmetry >= 0.0) {
        return std::make_pair(*previous, *now);
      }
      if (now) previous = now;
    }
    return std::nullopt;
  }
  // The zero of the asymmetry between two tries, linearly interpolated, as an offset from the
  // profile centre in px.
  double CentreAtZero(const std::pair<GainTry, GainTry>& turn, double step) const {
    const GainTry& before = turn.first;
    const GainTry& after = turn.second;
    const double w = before.asymmetry / (before.asymmetry - after.asymmetry);
    const double centre = before.centre + w * (after.centre - before.centre);
    return (centre - 0.5 * (static_cast<double>(p_.size()) - 1)) * step;
  }

 private:
  const std::vector<double>& p_;
  std::optional<Transition> t_;
};

// Gains e^k from 1/50 to e^16, in tenths.
constexpr double kGainFrom = -4.0, kGainTo = 16.0, kGainStep = 0.1;

}  // namespace

std::optional<double> SymmetricExposureCrossing(const std::vector<double>& p, double step) {
  const SymmetryProbe probe(p);
  if (!probe.usable()) return std::nullopt;
  // Half steps first, then tenths inside the half step where the asymmetry turns: the same
  // turn as tenths over the whole range unless it turns and turns back within half a step;
  // when half steps see no turn, tenths over the whole range.
  const auto coarse = probe.FirstTurn(kGainFrom, kGainTo, 0.5);
  const auto turn = coarse ? probe.FirstTurn(coarse->first.k, coarse->second.k, kGainStep)
                                 .value_or(*coarse)
                           : probe.FirstTurn(kGainFrom, kGainTo, kGainStep);
  if (!turn) return std::nullopt;
  return probe.CentreAtZero(*turn, step);
}

std::optional<double> SymmetricExposureCrossingReference(const std::vector<double>& p,
                                                         double step) {
  const SymmetryProbe probe(p);
  if (!probe.usable()) return std::nullopt;
  const auto turn = probe.FirstTurn(kGainFrom, kGainTo, kGainStep);
  if (!turn) return std::nullopt;
  return probe.CentreAtZero(*turn, step);
}

std::optional<double> SymmetricExposurePoint(const std::vector<double>& p, double step,
                                             const EdgeCrossing& e) {
  const auto symmetric = SymmetricExposureCrossing(p, step);
  if (!symmetric || std::fabs(*symmetric - e.span_centre) > std::max(1.0, e.penumbra)) {
    return std::nullopt;
  }
  return symmetric;
}

Line RobustLineFit(const std::vector<Point2d>& pts, const Line& start, double scale_px,
                   double* inlier_share) {
  Line line = start;
  const size_t n = pts.size();
  if (n < 2) {
    if (inlier_share) *inlier_share = 0.0;
    return line;
  }
  std::vector<double> w(n, 1.0), r(n);
  double sigma = std::max(scale_px, 1e-3);
  for (int iter = 0; iter < 12; ++iter) {
    for (size_t i = 0; i < n; ++i) r[i] = line.SignedDistance(pts[i]);
    if (iter > 0) {
      std::vector<double> a(n);
      for (size_t i = 0; i < n; ++i) a[i] = std::fabs(r[i]);
      sigma = std::max(1.4826 * MedianOf(a), 0.02);
    }
    const double c = 4.685 * sigma;  // Tukey biweight, 95 % efficiency constant
    double sw = 0, mx = 0, my = 0;
    for (size_t i = 0; i < n; ++i) {
      const double u = r[i] / c;
      w[i] = std::fabs(u) < 1.0 ? (1 - u * u) * (1 - u * u) : 0.0;
      sw += w[i];
      mx += w[i] * pts[i].x;
      my += w[i] * pts[i].y;
    }
    if (sw <= 0.0) break;
    mx /= sw;
    my /= sw;
    double sxx = 0, sxy = 0, syy = 0;
    for (size_t i = 0; i < n; ++i) {
      const double dx = pts[i].x - mx, dy = pts[i].y - my;
      sxx += w[i] * dx * dx;
      sxy += w[i] * dx * dy;
      syy += w[i] * dy * dy;
    }
    // Normal = eigenvector of the smaller eigenvalue of the scatter matrix.
    const double theta = 0.5 * std::atan2(2 * sxy, sxx - syy);  // direction of the line
    double nx = -std::sin(theta), ny = std::cos(theta);
    if (nx * start.nx + ny * start.ny < 0) { nx = -nx; ny = -ny; }
    line = Line{nx, ny, nx * mx + ny * my};
  }
  if (inlier_share) {
    int in = 0;
    for (size_t i = 0; i < n; ++i) in += std::fabs(line.SignedDistance(pts[i])) < 4.685 * sigma;
    *inlier_share = static_cast<double>(in) / n;
  }
  return line;
}

namespace {

// Profile across a line through c, from h outside to h inside in steps of `step`, each sample
// averaged over 2 * tangential + 1 positions along the line (direction t).
void SampleAcross(const Image& image, Point2d c, const Line& line, Point2d t, double h,
                  double step, int tangential, std::vector<double>* prof) {
  for (size_t i = 0; i < prof->size(); ++i) {
    const double o = h - i * step;  // outside (index 0) to inside
    double sum = 0.0;
    for (int j = -tangential; j <= tangential; ++j) {
      sum += SampleBilinear(image, c.x + o * line.nx + j * t.x, c.y + o * line.ny + j * t.y);
    }
    (*prof)[i] = sum / (2 * tangential + 1);
  }
}

struct ProfileSet {
  std::vector<Point2d> points;
  // Processed images with the half-transition definition: each point's profile and crossing.
  std::vector<std::vector<double>> profiles;
  std::vector<EdgeCrossing> crossings;
  std::vector<double> lows, highs, penumbras;
  int quarter_misses = 0;
};

ProfileSet SampleProfiles(const Image& image, const Line& line, Point2d a, Point2d b,
                          double half, bool linear, EdgeDefinition def, const cv::Mat1b* valid,
                          int factor) {
  ProfileSet set;
  const double len = std::hypot(b.x - a.x, b.y - a.y);
  if (len < 1.0) return set;
  const double tx = (b.x - a.x) / len, ty = (b.y - a.y) / len;
  const double nx = line.nx, ny = line.ny;
  const double step = 0.5;
  const int m = 2 * static_cast<int>(std::ceil(half / step)) + 1;
  const double h = 0.5 * (m - 1) * step;
  // A profile every 4 px, and at least the three a line fit needs (a tiny field's side).
  const int count = std::clamp(static_cast<int>(len / 4.0), 3, 80);
  const int tangential = std::clamp(factor / 4, 1, 3);
  auto is_valid = [&](double x, double y) {
    if (!valid || valid->empty()) return true;
    const int wx = static_cast<int>(x / factor), wy = static_cast<int>(y / factor);
    // Beyond the image border the sampler repeats the border pixels: harmless for levels.
    if (wx < 0 || wy < 0 || wx >= valid->cols || wy >= valid->rows) return true;
    return (*valid)(wy, wx) != 0;
  };
  std::vector<double> prof(m);
  for (int k = 0; k < count; ++k) {
    const double s = (k + 0.5) * len / count;
    const double qx = a.x + s * tx, qy = a.y + s * ty;
    // Projected onto the current line so the profile is centred on it.
    const double d = line.SignedDistance({qx, qy});
    const double cx = qx - d * nx, cy = qy - d * ny;
    if (!is_valid(cx + h * nx, cy + h * ny) || !is_valid(cx - h * nx, cy - h * ny)) continue;
    if (cx < 0 || cy < 0 || cx > image.width() || cy > image.height()) continue;
    SampleAcross(image, {cx, cy}, line, {tx, ty}, h, step, tangential, &prof);
    std::optional<double> absolute;
    if (def == EdgeDefinition::kQuarterMaximum && linear) {
      absolute = 0.25 * *std::max_element(prof.begin() + m / 2, prof.end());
    }
    EdgeCrossing e = LocateCrossing(prof, step, 0.5, absolute);
    if (!e.ok && absolute) {
      ++set.quarter_misses;
      e = LocateCrossing(prof, step, 0.5);
    }
    if (!e.ok) continue;
    // On a processed (log-like) image the 50 % display level lies towards the blocked side
    // of the linear 50 % point; the centre of the 10-90 % span lies much closer to it, and
    // RefineSide moves each point to its symmetric exposure point once the line has settled.
    const bool processed_half = !linear && def == EdgeDefinition::kHalfTransition;
    const double offset = processed_half ? e.span_centre : e.offset;
    if (processed_half) {
      set.profiles.push_back(prof);
      set.crossings.push_back(e);
    }
    set.points.push_back({cx - offset * nx, cy - offset * ny});
    set.lows.push_back(e.low);
    set.highs.push_back(e.high);
    set.penumbras.push_back(e.penumbra);
  }
  return set;
}

}  // namespace

EdgeBow FitBow(const std::vector<Point2d>& along_offset) {
  EdgeBow bow;
  const size_t n = along_offset.size();
  if (n < 5) return bow;
  double lo = along_offset.front().x, hi = lo;
  for (const Point2d& p : along_offset) {
    lo = std::min(lo, p.x);
    hi = std::max(hi, p.x);
  }
  if (!(hi > lo)) return bow;
  std::vector<double> u(n), d(n), r(n), w(n, 1.0);
  for (size_t i = 0; i < n; ++i) {
    u[i] = 2.0 * (along_offset[i].x - lo) / (hi - lo) - 1.0;
    d[i] = along_offset[i].y;
  }
  // Iteratively reweighted least squares with Tukey's biweight, from the median offset.
  Eigen::Vector3d coef(MedianOf(d), 0.0, 0.0);
  double sigma = 0.0;
  Eigen::Matrix3d normal = Eigen::Matrix3d::Zero();
  for (int iter = 0; iter < 20; ++iter) {
    std::vector<double> abs_r(n);
    for (size_t i = 0; i < n; ++i) {
      r[i] = d[i] - (coef[0] + coef[1] * u[i] + coef[2] * u[i] * u[i]);
      abs_r[i] = std::fabs(r[i]);
    }
    sigma = std::max(1.4826 * MedianOf(abs_r), 0.05);
    const double c = 4.685 * sigma;  // Tukey biweight, 95 % efficiency constant
    normal.setZero();
    Eigen::Vector3d rhs = Eigen::Vector3d::Zero();
    for (size_t i = 0; i < n; ++i) {
      const double q = r[i] / c;
      w[i] = std::fabs(q) < 1.0 ? (1 - q * q) * (1 - q * q) : 0.0;
      const Eigen::Vector3d x(1.0, u[i], u[i] * u[i]);
      normal += w[i] * x * x.transpose();
      rhs += w[i] * d[i] * x;
    }
    if (std::fabs(normal.determinant()) < 1e-12) return bow;
    coef = normal.ldlt().solve(rhs);
  }
  Eigen::Matrix3d unweighted = Eigen::Matrix3d::Zero();
  for (size_t i = 0; i < n; ++i) {
    if (w[i] <= 0.0) continue;
    const Eigen::Vector3d x(1.0, u[i], u[i] * u[i]);
    unweighted += x * x.transpose();
    ++bow.points;
  }
  if (bow.points < 5 || std::fabs(unweighted.determinant()) < 1e-12) return bow;
  bow.sagitta_px = -coef[2];  // the middle against the chord through the ends
  bow.spread_px = sigma;
  bow.standard_error_px = sigma * std::sqrt(unweighted.inverse()(2, 2));
  return bow;
}

namespace {

// On each profile across [a, b], the crossing of `level` nearest to the line, as (position
// along the side, offset towards the outside) pairs.
std::vector<Point2d> TraceLevel(const Image& image, const Line& line, Point2d a, Point2d b,
                               double half, double level, const cv::Mat1b* valid, int factor) {
  std::vector<Point2d> out;
  const double len = std::hypot(b.x - a.x, b.y - a.y);
  if (len < 1.0) return out;
  const Point2d t{(b.x - a.x) / len, (b.y - a.y) / len};
  const double step = 0.5;
  const int m = 2 * static_cast<int>(std::ceil(half / step)) + 1;
  const double h = 0.5 * (m - 1) * step;
  const int count = std::clamp(static_cast<int>(len / 4.0), 3, 80);
  const int tangential = std::clamp(factor / 4, 1, 3);
  std::vector<double> prof(m);
  for (int k = 0; k < count; ++k) {
    const double s = (k + 0.5) * len / count;
    const Point2d q{a.x + s * t.x, a.y + s * t.y};
    const double d = line.SignedDistance(q);
    const Point2d c{q.x - d * line.nx, q.y - d * line.ny};
    if (c.x < 0 || c.y < 0 || c.x > image.width() || c.y > image.height()) continue;
    bool inside_valid = true;
    if (valid && !valid->empty()) {
      for (double o : {-h, h}) {
        const int wx = static_cast<int>((c.x + o * line.nx) / factor);
        const int wy = static_cast<int>((c.y + o * line.ny) / factor);
        if (wx >= 0 && wy >= 0 && wx < valid->cols && wy < valid->rows && (*valid)(wy, wx) == 0) {
          inside_valid = false;
        }
      }
    }
    if (!inside_valid) continue;
    SampleAcross(image, c, line, t, h, step, tangential, &prof);
    if (auto j = NearestCrossing(prof, (m - 1) / 2, level)) out.push_back({s, h - *j * step});
  }
  return out;
}

}  // namespace

EdgeBow TraceEdgeBow(const Image& image, const Line& line, Point2d a, Point2d b, double half,
                     double level, const cv::Mat1b* valid, int factor) {
  return FitBow(TraceLevel(image, line, a, b, half, level, valid, factor));
}

bool BowsCleanly(const EdgeBow& bow, double min_sagitta_px) {
  const double sagitta = std::fabs(bow.sagitta_px);
  return bow.points >= 5 && sagitta >= min_sagitta_px && sagitta >= kArcCleanness * bow.spread_px;
}

bool FollowsAnArc(const EdgeBow& points, const EdgeBow& traced, double min_sagitta_px) {
  if (!BowsCleanly(points, min_sagitta_px) || !BowsCleanly(traced, min_sagitta_px)) return false;
  if (points.sagitta_px * traced.sagitta_px <= 0.0) return false;
  const double ratio = std::fabs(points.sagitta_px / traced.sagitta_px);
  return ratio <= kArcAgreement && ratio >= 1.0 / kArcAgreement;
}

namespace {

// Bow of edge points about a line, along [a, b].
EdgeBow BowAbout(const std::vector<Point2d>& points, const Line& line, Point2d a, Point2d b) {
  const double len = std::hypot(b.x - a.x, b.y - a.y);
  if (len < 1.0) return {};
  const double tx = (b.x - a.x) / len, ty = (b.y - a.y) / len;
  std::vector<Point2d> along_offset;
  along_offset.reserve(points.size());
  for (const Point2d& q : points) {
    along_offset.push_back({(q.x - a.x) * tx + (q.y - a.y) * ty, line.SignedDistance(q)});
  }
  return FitBow(along_offset);
}

}  // namespace

RefinedSide RefineSide(const Image& image, const Line& coarse, Point2d a, Point2d b,
                       double search_px, bool linear, EdgeDefinition definition,
                       const cv::Mat1b* valid, int factor) {
  RefinedSide out;
  Line line = coarse;
  double half = search_px;
  ProfileSet set;
  // Second pass: a narrower window around the fitted line, wide enough for the penumbra. A
  // long SID or a large focal spot can make the penumbra wider than the search window; the
  // profiles then end inside the transition (its 10-90 % width exceeds the half-window), and
  // the window grows to three penumbra widths and the pass is repeated. Exposure profiles
  // only: on processed images the wider window reached into edge-enhancement halos and
  // anatomy and made the fits worse on the benchmark.
  const double widest = linear ? std::max(search_px, 16.0 * factor) : search_px;
  // Scale of the first line fit: the coarse line may lie anywhere in the window; after a pass
  // on truncated profiles, within a fraction of the penumbra.
  double fit_scale = half / 2;
  for (int pass = 0; pass < 4; ++pass) {
    set = SampleProfiles(image, line, a, b, half, linear, definition, valid, factor);
    if (set.points.size() < 3) return out;
    line = RobustLineFit(set.points, line, fit_scale, &out.inlier_share);
    const double penumbra = MedianOf(set.penumbras);
    const bool truncated = penumbra > half && half < widest;
    if (pass >= 1 && !truncated) break;
    half = truncated ? std::min(3.0 * penumbra, widest) : std::clamp(3.0 * penumbra, 8.0, search_px);
    fit_scale = truncated ? std::max(1.0, penumbra / 4) : 1.0;
  }
  out.bow = BowAbout(set.points, line, a, b);
  if (!set.profiles.empty()) {
    // Processed image: every point moved to its own profile's symmetric exposure point, and the
    // line fitted again. Per profile, as the lopsidedness depends on the local contrast. A
    // profile without one keeps its span centre, biased towards the blocked side; mixed with
    // the moved points such points tilt the line, so they are left out when at least half of
    // the profiles have a symmetric point.
    std::vector<Point2d> symmetric;
    for (size_t i = 0; i < set.points.size(); ++i) {
      const EdgeCrossing& e = set.crossings[i];
      const auto point = SymmetricExposurePoint(set.profiles[i], 0.5, e);
      if (!point) continue;
      const double inward = *point - e.span_centre;
      set.points[i].x -= inward * line.nx;
      set.points[i].y -= inward * line.ny;
      symmetric.push_back(set.points[i]);
    }
    const bool enough = symmetric.size() >= 3 && 2 * symmetric.size() >= set.points.size();
    line = RobustLineFit(enough ? symmetric : set.points, line, 1.0, &out.inlier_share);
  }
  out.ok = true;
  out.line = line;
  out.profiles = static_cast<int>(set.points.size());
  const double low = MedianOf(set.lows), high = MedianOf(set.highs);
  out.contrast_ratio = low > 0.0 ? high / low : 0.0;
  if (!linear && low > 0.0) out.contrast_ratio = high / low;
  out.penumbra_px = MedianOf(set.penumbras);
  out.quarter_fallback = set.quarter_misses * 2 > static_cast<int>(set.points.size());
  out.level = 0.5 * (low + high);
  out.window_px = half;
  return out;
}

}  // namespace beamtrim::field_internal
