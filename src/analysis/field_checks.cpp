// Checks around the field: an electronically blanked outside, a second exposure on the same
// plate, and the half-plane clip used to build the field polygon.
#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "analysis/field_internal.h"

namespace beamtrim::field_internal {
namespace {

// The most common exactly-constant block value on the image border (at least 3 blocks).
std::optional<float> BorderConstant(const Blocks& b) {
  std::map<float, int> counts;
  const int w = b.mean.cols, h = b.mean.rows;
  for (int y = 0; y < h; ++y) {
    for (int x = 0; x < w; ++x) {
      if (y != 0 && y != h - 1 && x != 0 && x != w - 1) continue;
      if (b.min(y, x) == b.max(y, x)) ++counts[b.min(y, x)];
    }
  }
  std::optional<float> best;
  int best_count = 2;
  for (auto [v, n] : counts) {
    if (n > best_count) { best = v; best_count = n; }
  }
  return best;
}

// Smallest positive difference between the distinct values in `v`: the grey-level spacing of
// an image exported with few levels (8 bits), tiny on float or 16-bit data.
double Quantum(std::vector<float> v) {
  std::sort(v.begin(), v.end());
  v.erase(std::unique(v.begin(), v.end()), v.end());
  double q = std::numeric_limits<double>::infinity();
  for (size_t i = 1; i < v.size(); ++i) q = std::min(q, static_cast<double>(v[i] - v[i - 1]));
  return std::isfinite(q) ? q : 0.0;
}

// At the mask boundary: the median step from a masked pixel to its unmasked neighbour
// (`jump`), the median step from that neighbour one pixel further on (`next`) and the grey-
// level spacing of the pixels there (`quantum`). A mask cuts the image abruptly (jump >>
// next); a clipped or noiseless plateau meeting a penumbra ramp continues smoothly (jump ~
// next), or in single grey levels when the image has few of them.
void BoundarySteps(const Image& image, const cv::Mat1b& mask, int factor, float c,
                   double* jump, double* next, double* quantum) {
  cv::Mat1b ring;
  cv::dilate(mask, ring, cv::Mat());
  cv::Mat1b inner;
  cv::erode(mask, inner, cv::Mat());
  ring = ring & ~inner;
  std::vector<double> jumps, nexts;
  std::vector<float> levels{c};
  const int dirs[4][2] = {{-1, 0}, {1, 0}, {0, -1}, {0, 1}};
  auto inside = [&](int x, int y) { return x >= 0 && y >= 0 && x < image.width() && y < image.height(); };
  for (int by = 0; by < ring.rows; ++by) {
    for (int bx = 0; bx < ring.cols; ++bx) {
      if (!ring(by, bx)) continue;
      for (int y = by * factor; y < std::min(image.height(), (by + 1) * factor); ++y) {
        for (int x = bx * factor; x < std::min(image.width(), (bx + 1) * factor); ++x) {
          if (image.at(x, y) != c) continue;
          for (const auto& d : dirs) {
            const int px = x + d[0], py = y + d[1], qx = px + d[0], qy = py + d[1];
            if (!inside(qx, qy)) continue;
            const float vp = image.at(px, py), vq = image.at(qx, qy);
            if (vp == c || vq == c) continue;
            jumps.push_back(std::fabs(vp - c));
            nexts.push_back(std::fabs(vq - vp));
            levels.push_back(vp);
            levels.push_back(vq);
          }
        }
      }
    }
  }
  auto median = [](std::vector<double>& v) {
    if (v.empty()) return 0.0;
    std::nth_element(v.begin(), v.begin() + v.size() / 2, v.end());
    return v[v.size() / 2];
  };
  *jump = median(jumps);
  *next = median(nexts);
  *quantum = Quantum(std::move(levels));
}

}  // namespace

BlankResult FindBlankMask(const Image& image, const Blocks& blocks, int factor, bool linear) {
  BlankResult out;
  out.mask = cv::Mat1b(blocks.mean.size(), 0);
  const auto c = BorderConstant(blocks);
  if (!c) return out;
  cv::Mat1b constant = (blocks.min == *c) & (blocks.max == *c);
  // Keep the constant blocks connected to the border.
  cv::Mat1i labels;
  const int n = cv::connectedComponents(constant, labels, 4, CV_32S);
  std::vector<bool> touches(n, false);
  for (int y = 0; y < labels.rows; ++y) {
    for (int x = 0; x < labels.cols; ++x) {
      if (y == 0 || x == 0 || y == labels.rows - 1 || x == labels.cols - 1) {
        touches[labels(y, x)] = labels(y, x) > 0;
      }
    }
  }
  for (int y = 0; y < labels.rows; ++y) {
    for (int x = 0; x < labels.cols; ++x) out.mask(y, x) = touches[labels(y, x)] ? 255 : 0;
  }
  const double share = cv::countNonZero(out.mask) / static_cast<double>(out.mask.total());
  if (share < 0.01 || share > 0.97) {
    out.mask.setTo(0);
    return out;
  }
  // A display window clipping a dark plateau also gives constant pixels, but they join the
  // rest of the image smoothly; an electronic mask ends in a jump. On processed images the
  // jump must also be visible on the display scale. On linear images no such floor applies:
  // a mask at zero beside the blocked plateau jumps by the plateau's own level, which may be
  // well under a thousandth of the open level when the blades leak little, yet a quantum-
  // noise plateau never holds whole blocks of one exact value.
  cv::Mat1b rest = out.mask == 0;
  const double hi = Percentile(blocks.mean, rest, 99.9);
  const double lo = Percentile(blocks.mean, rest, 0.1);
  const double span = std::max({std::fabs(hi - *c), std::fabs(lo - *c), 1e-12});
  // On an image with few grey levels a clipped plateau meets the ramp in single-level steps,
  // and the ramp's next step is often no step at all: a jump of one or two levels is no mask.
  double jump = 0.0, next = 0.0, quantum = 0.0;
  BoundarySteps(image, out.mask, factor, *c, &jump, &next, &quantum);
  const double floor = std::max(linear ? 0.0 : 0.005 * span, 2.0 * quantum);
  if (jump <= floor || jump < 3.0 * next) {
    out.mask.setTo(0);
    return out;
  }
  out.blanked = true;
  out.value = *c;
  return out;
}

Polygon ClipHalfPlane(const Polygon& in, const Line& line) {
  Polygon out;
  if (in.empty()) return out;
  Point2d prev = in.back();
  double dp = line.SignedDistance(prev);
  for (const Point2d& cur : in) {
    const double dc = line.SignedDistance(cur);
    if ((dc <= 0) != (dp <= 0)) {
      const double t = dp / (dp - dc);
      out.push_back({prev.x + t * (cur.x - prev.x), prev.y + t * (cur.y - prev.y)});
    }
    if (dc <= 0) out.push_back(cur);
    prev = cur;
    dp = dc;
  }
  return out;
}

bool FindSecondExposure(const WorkingImage& working, const Polygon& field_w, double blocked,
                        double open, std::string* note) {
  if (field_w.size() < 3 || !(open > blocked)) return false;
  cv::Mat1b field(working.value.size(), 0);
  std::vector<cv::Point> poly;
  for (const Point2d& p : field_w) {
    poly.emplace_back(static_cast<int>(std::lround(p.x)), static_cast<int>(std::lround(p.y)));
  }
  cv::fillPoly(field, std::vector<std::vector<cv::Point>>{poly}, 255);
  cv::dilate(field, field, cv::Mat(), cv::Point(-1, -1), 3);
  cv::Mat1b bright = (working.value > blocked + 0.5 * (open - blocked)) & working.valid & ~field;
  cv::morphologyEx(bright, bright, cv::MORPH_OPEN, cv::Mat());
  cv::Mat1i labels, stats;
  cv::Mat1d centroids;
  const int n = cv::connectedComponentsWithStats(bright, labels, stats, centroids, 8, CV_32S);
  const double field_area = std::max(1.0, Area(field_w));
  for (int i = 1; i < n; ++i) {
    const int area = stats(i, cv::CC_STAT_AREA);
    if (area < std::max(25.0, 0.1 * field_area)) continue;
    std::vector<cv::Point> pts;
    for (int y = stats(i, cv::CC_STAT_TOP); y < stats(i, cv::CC_STAT_TOP) + stats(i, cv::CC_STAT_HEIGHT); ++y) {
      for (int x = stats(i, cv::CC_STAT_LEFT); x < stats(i, cv::CC_STAT_LEFT) + stats(i, cv::CC_STAT_WIDTH); ++x) {
        if (labels(y, x) == i) pts.emplace_back(x, y);
      }
    }
    const cv::RotatedRect box = cv::minAreaRect(pts);
    const double fill = area / std::max(1.0, static_cast<double>(box.size.area()));
    if (fill < 0.5) continue;
    if (note) {
      *note = "a second exposed region (" + std::to_string(area) +
              " working pixels) lies outside the field: possible double exposure";
    }
    return true;
  }
  return false;
}

}  // namespace beamtrim::field_internal
