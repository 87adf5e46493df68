// X-ray field edges for QC. The field is located on the marker-free background (Otsu threshold,
// largest component), then each blade edge is measured on the native pixels: profiles across
// the edge are averaged in short bins along it, skipping every line that crosses a marker, the
// edge level is found in each bin (a quarter of the open-field level on linear images, 21 CFR
// 1020.30(b); otherwise halfway between the blocked and open plateaus), and a straight line is
// fitted through the bin crossings with outlier rejection.
#include <algorithm>
#include <cmath>

#include <opencv2/imgproc.hpp>

#include "qc/qc_internal.h"

namespace beamtrim::qc_internal {
namespace {

constexpr double kBinMm = 4.0;          // bin length along the edge
constexpr double kInsideFromMm = 8.0;   // open plateau: this far inside the coarse edge ...
constexpr double kInsideToMm = 25.0;    // ... to this far
constexpr double kOutsideFromMm = 6.0;  // blocked plateau: this far outside ...
constexpr double kOutsideToMm = 16.0;   // ... to this far (clipped to the image)
constexpr double kMinOutsideMm = 2.0;   // less blocked region than this: edge not measurable
constexpr double kEndMargin = 0.12;     // fraction of the edge length skipped near corners
constexpr double kMarkerGuardMm = 1.5;  // lines this close to a marker are skipped

double Median(std::vector<double> v) {
  if (v.empty()) return 0.0;
  size_t mid = v.size() / 2;
  std::nth_element(v.begin(), v.begin() + mid, v.end());
  return v[mid];
}

bool IsVertical(Side side) { return side == Side::kLeft || side == Side::kRight; }
// +1 when outward means increasing coordinate (right, bottom).
double OutwardSign(Side side) {
  return side == Side::kRight || side == Side::kBottom ? 1.0 : -1.0;
}

// Coarse field box from the largest bright component of the marker-free background.
bool CoarseBox(const WorkingImages& work, FieldEdges* edges) {
  if (work.field_contrast <= 0.0) {
    edges->reason = "no exposed field found: the image has no contrast between field and blades";
    return false;
  }
  cv::Mat bright = work.background > 0.5 * (work.open_level + work.blocked_level);
  cv::Mat labels, stats, centroids;
  int n = cv::connectedComponentsWithStats(bright, labels, stats, centroids, 8, CV_32S);
  int best = 0;
  for (int i = 1; i < n; ++i) {
    if (best == 0 || stats.at<int>(i, cv::CC_STAT_AREA) > stats.at<int>(best, cv::CC_STAT_AREA)) best = i;
  }
  if (best == 0 || stats.at<int>(best, cv::CC_STAT_AREA) < 100) {
    edges->reason = "no exposed field found";
    return false;
  }
  std::vector<cv::Point> points;
  cv::findNonZero(labels == best, points);
  cv::RotatedRect rect = cv::minAreaRect(points);
  double angle = rect.angle;  // OpenCV reports [0, 90): fold to the nearest axis
  while (angle > 45.0) angle -= 90.0;
  while (angle < -45.0) angle += 90.0;
  edges->rotation_deg = angle;
  int x = stats.at<int>(best, cv::CC_STAT_LEFT), y = stats.at<int>(best, cv::CC_STAT_TOP);
  edges->coarse = {double(x), double(x + stats.at<int>(best, cv::CC_STAT_WIDTH)), double(y),
                   double(y + stats.at<int>(best, cv::CC_STAT_HEIGHT))};
  return true;
}

// Rows (or columns) of an edge that cross no marker inside the profile window.
std::vector<uint8_t> UsableLines(Side side, int count, double lo, double hi,
                                 const std::vector<QcMarker>& markers, double guard_px) {
  std::vector<uint8_t> usable(count, 1);
  for (const QcMarker& m : markers) {
    double a0 = 1e30, a1 = -1e30, p0 = 1e30, p1 = -1e30;
    for (const Point2d& q : m.outline_px) {
      double along = IsVertical(side) ? q.y : q.x;
      double pos = IsVertical(side) ? q.x : q.y;
      a0 = std::min(a0, along); a1 = std::max(a1, along);
      p0 = std::min(p0, pos); p1 = std::max(p1, pos);
    }
    if (p1 + guard_px < lo || p0 - guard_px > hi) continue;  // not in the profile window
    int from = std::max(0, static_cast<int>(std::floor(a0 - guard_px)));
    int to = std::min(count - 1, static_cast<int>(std::ceil(a1 + guard_px)));
    for (int i = from; i <= to; ++i) usable[i] = 0;
  }
  return usable;
}

// Averaged profile of the native image across the edge, over lines [from, to) that are usable.
// Index k is position lo + k (pixel centres at lo + k + 0.5).
std::vector<double> BinProfile(const cv::Mat& native, Side side, int from, int to, int lo, int hi,
                               const std::vector<uint8_t>& usable, int* lines) {
  std::vector<double> profile(hi - lo, 0.0);
  *lines = 0;
  for (int line = from; line < to; ++line) {
    if (!usable[line]) continue;
    ++*lines;
    for (int k = lo; k < hi; ++k) {
      profile[k - lo] += IsVertical(side) ? native.at<float>(line, k) : native.at<float>(k, line);
    }
  }
  if (*lines > 0) for (double& v : profile) v /= *lines;
  return profile;
}

struct BinEdge {
  double along = 0.0;
  double position = 0.0;
  double open = 0.0;
  double blocked = 0.0;
};

// Finds the crossing of `fraction` in one averaged profile; false when there is none.
bool CrossingInProfile(const std::vector<double>& profile, int lo, double coarse, Side side,
                       double pixel_mm, EdgeDefinition definition, BinEdge* out) {
  double s = OutwardSign(side);
  auto index = [&](double mm) { return static_cast<int>(std::lround(coarse - s * mm / pixel_mm)) - lo; };
  auto plateau = [&](double from_mm, double to_mm) {
    int i0 = index(from_mm), i1 = index(to_mm);
    std::vector<double> v;
    for (int i = std::min(i0, i1); i <= std::max(i0, i1); ++i) {
      if (i >= 0 && i < static_cast<int>(profile.size())) v.push_back(profile[i]);
    }
    return Median(v);
  };
  out->open = plateau(kInsideFromMm, kInsideToMm);
  out->blocked = plateau(-kOutsideToMm, -kOutsideFromMm);
  double level = definition == EdgeDefinition::kQuarterMaximum
                     ? 0.25 * out->open
                     : 0.5 * (out->open + out->blocked);
  // Walk outward from the open plateau to the first sample below the level.
  int start = index(kInsideFromMm), stop = index(-kOutsideToMm);
  int step = start < stop ? 1 : -1;
  for (int i = start; i != stop; i += step) {
    int j = i + step;
    if (i < 0 || j < 0 || i >= static_cast<int>(profile.size()) || j >= static_cast<int>(profile.size())) return false;
    if (profile[i] >= level && profile[j] < level) {
      double t = (profile[i] - level) / (profile[i] - profile[j]);
      out->position = lo + i + 0.5 + t * step;
      return true;
    }
  }
  return false;
}

// Least-squares line position = a + b * along, twice refitted without outliers.
bool FitLine(std::vector<BinEdge> bins, EdgeFit* fit) {
  for (int round = 0; round < 3; ++round) {
    if (bins.size() < 3) return false;
    double n = bins.size(), sa = 0, sp = 0, saa = 0, sap = 0;
    for (const BinEdge& e : bins) { sa += e.along; sp += e.position; saa += e.along * e.along; sap += e.along * e.position; }
    double det = n * saa - sa * sa;
    fit->b = std::fabs(det) > 1e-9 ? (n * sap - sa * sp) / det : 0.0;
    fit->a = (sp - fit->b * sa) / n;
    std::vector<double> residuals;
    for (const BinEdge& e : bins) residuals.push_back(std::fabs(e.position - fit->At(e.along)));
    double limit = std::max(0.5, 3.0 * 1.4826 * Median(residuals));
    std::vector<BinEdge> kept;
    for (const BinEdge& e : bins) if (std::fabs(e.position - fit->At(e.along)) <= limit) kept.push_back(e);
    if (kept.size() == bins.size()) break;
    bins = std::move(kept);
  }
  fit->bins_used = static_cast<int>(bins.size());
  std::vector<double> open, blocked;
  for (const BinEdge& e : bins) { open.push_back(e.open); blocked.push_back(e.blocked); }
  fit->open_level = Median(open);
  fit->blocked_level = Median(blocked);
  return true;
}

EdgeFit FitSide(const WorkingImages& work, const FieldEdges& edges, Side side,
                std::array<double, 2> spacing_mm, const std::vector<QcMarker>& markers,
                EdgeDefinition definition) {
  EdgeFit fit;
  const cv::Mat& img = work.native;
  bool vertical = IsVertical(side);
  double pixel_mm = vertical ? spacing_mm[1] : spacing_mm[0];
  double along_mm = vertical ? spacing_mm[0] : spacing_mm[1];
  int extent = vertical ? img.cols : img.rows;    // across the edge
  int lines = vertical ? img.rows : img.cols;     // along the edge
  double coarse = edges.coarse[static_cast<int>(side)];
  double s = OutwardSign(side);
  double outside_room_mm = (s > 0 ? extent - coarse : coarse) * pixel_mm;
  if (outside_room_mm < kMinOutsideMm) {
    fit.reason = "the x-ray field reaches the receptor border: no blade shadow to measure";
    return fit;
  }
  double w0 = coarse - s * kInsideToMm / pixel_mm, w1 = coarse + s * kOutsideToMm / pixel_mm;
  int lo = std::clamp(static_cast<int>(std::floor(std::min(w0, w1))), 0, extent - 1);
  int hi = std::clamp(static_cast<int>(std::ceil(std::max(w0, w1))), lo + 1, extent);
  double a0 = vertical ? edges.coarse[2] : edges.coarse[0];
  double a1 = vertical ? edges.coarse[3] : edges.coarse[1];
  int from = static_cast<int>(a0 + kEndMargin * (a1 - a0));
  int to = static_cast<int>(a1 - kEndMargin * (a1 - a0));
  std::vector<uint8_t> usable = UsableLines(side, lines, lo, hi, markers, kMarkerGuardMm / pixel_mm);
  int bin = std::max(2, static_cast<int>(std::lround(kBinMm / along_mm)));
  std::vector<BinEdge> bins;
  for (int start = from; start + bin <= to; start += bin) {
    int used = 0;
    std::vector<double> profile = BinProfile(img, side, start, start + bin, lo, hi, usable, &used);
    if (used < bin / 2) continue;
    BinEdge e;
    e.along = start + 0.5 * bin;
    if (CrossingInProfile(profile, lo, coarse, side, pixel_mm, definition, &e)) bins.push_back(e);
  }
  if (!FitLine(bins, &fit)) {
    fit.reason = "too few clear profiles across the blade shadow";
    return fit;
  }
  fit.found = true;
  return fit;
}

}  // namespace

FieldEdges FindFieldEdges(const WorkingImages& work, bool linear,
                          std::array<double, 2> spacing_mm, const std::vector<QcMarker>& markers,
                          const QcOptions& options) {
  FieldEdges edges;
  if (!CoarseBox(work, &edges)) return edges;
  if (std::fabs(edges.rotation_deg) > options.max_rotation_deg) {
    edges.reason = "the field is rotated by " + std::to_string(std::lround(edges.rotation_deg)) +
                   " degrees; make the QC exposure with the collimator at 0 degrees";
    return edges;
  }
  EdgeDefinition definition =
      linear ? EdgeDefinition::kQuarterMaximum : EdgeDefinition::kHalfTransition;
  for (Side side : kAllSides) {
    edges.fits[static_cast<int>(side)] = FitSide(work, edges, side, spacing_mm, markers, definition);
  }
  if (linear) {
    // The quarter-maximum edge exists only where the blocked signal stays below a quarter of
    // the open field; with a margin, fall back to the 50 % definition for every edge.
    bool allows = true;
    for (const EdgeFit& f : edges.fits) {
      if (f.found && f.blocked_level >= 0.2 * f.open_level) allows = false;
    }
    if (!allows) {
      definition = EdgeDefinition::kHalfTransition;
      edges.notes.push_back(
          "the signal behind the blades exceeds 20 % of the open field, so the quarter-maximum "
          "edge (21 CFR 1020.30(b)) is not well defined: the 50 % edge is used instead");
      for (Side side : kAllSides) {
        edges.fits[static_cast<int>(side)] = FitSide(work, edges, side, spacing_mm, markers, definition);
      }
    }
  } else {
    edges.notes.push_back(
        "processed (non-linear) image: x-ray field edges at 50 % between the blocked and open "
        "levels of the displayed values, not the regulatory quarter-maximum of exposure; use the "
        "raw (FOR PROCESSING) image for the quarter-maximum edge");
  }
  edges.definition = definition;
  edges.found = true;
  return edges;
}

}  // namespace beamtrim::qc_internal
