// Segmentation of the field into direct exposure, anatomy and non-anatomical metal, on a
// working image of about 1 mm pixels in the log domain (docs/metrics.md, "Anatomy").
#include <algorithm>
#include <cmath>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "analysis/anatomy_internal.h"

namespace beamtrim::anatomy_internal {
namespace {

double Median(std::vector<float> v) {
  if (v.empty()) return 0.0;
  auto mid = v.begin() + v.size() / 2;
  std::nth_element(v.begin(), mid, v.end());
  return *mid;
}

double Quantile(std::vector<float> v, double q) {
  if (v.empty()) return 0.0;
  auto k = v.begin() + static_cast<long>(std::clamp(q, 0.0, 1.0) * (v.size() - 1));
  std::nth_element(v.begin(), k, v.end());
  return *k;
}

std::vector<float> Values(const cv::Mat& img, const cv::Mat& mask) {
  std::vector<float> out;
  for (int y = 0; y < img.rows; ++y) {
    const float* p = img.ptr<float>(y);
    const uchar* m = mask.ptr<uchar>(y);
    for (int x = 0; x < img.cols; ++x) {
      if (m[x]) out.push_back(p[x]);
    }
  }
  return out;
}

double RobustSigma(const std::vector<float>& v) {
  if (v.size() < 2) return 0.0;
  double med = Median(v);
  std::vector<float> dev(v.size());
  for (size_t i = 0; i < v.size(); ++i) dev[i] = static_cast<float>(std::fabs(v[i] - med));
  return 1.4826 * Median(dev);
}

// Otsu's threshold (Otsu 1979) on a 256-bin histogram between the 0.5 and 99.5 percentiles.
double OtsuThreshold(const std::vector<float>& v) {
  double lo = Quantile(v, 0.005);
  double hi = Quantile(v, 0.995);
  if (!(hi > lo)) return hi;
  std::vector<double> hist(256, 0.0);
  for (float x : v) {
    int b = static_cast<int>((x - lo) / (hi - lo) * 255.0);
    hist[std::clamp(b, 0, 255)] += 1.0;
  }
  double total = 0.0, sum = 0.0;
  for (int i = 0; i < 256; ++i) { total += hist[i]; sum += i * hist[i]; }
  double w0 = 0.0, sum0 = 0.0, best = -1.0;
  int best_i = 127;
  for (int i = 0; i < 255; ++i) {
    w0 += hist[i];
    sum0 += i * hist[i];
    double w1 = total - w0;
    if (w0 <= 0.0 || w1 <= 0.0) continue;
    double m0 = sum0 / w0, m1 = (sum - sum0) / w1;
    double between = w0 * w1 * (m0 - m1) * (m0 - m1);
    if (between > best) { best = between; best_i = i; }
  }
  return lo + (best_i + 1) * (hi - lo) / 255.0;
}

// Two-threshold Otsu (three classes; Liao, Chen and Chung 2001, "A fast algorithm for
// multilevel thresholding") on a 128-bin histogram between the 0.5 and 99.5 percentiles.
// Returns the lower of the two thresholds: on attenuations, the values below it are the least
// attenuated class (direct exposure beside soft tissue and bone, or beside tissue and metal).
double LowerOtsu3Threshold(const std::vector<float>& v) {
  double lo = Quantile(v, 0.005);
  double hi = Quantile(v, 0.995);
  if (!(hi > lo)) return hi;
  constexpr int kBins = 128;
  std::vector<double> p(kBins + 1, 0.0), s(kBins + 1, 0.0);  // prefix mass and first moment
  std::vector<double> hist(kBins, 0.0);
  for (float x : v) hist[std::clamp(static_cast<int>((x - lo) / (hi - lo) * (kBins - 1)), 0, kBins - 1)] += 1.0;
  for (int i = 0; i < kBins; ++i) { p[i + 1] = p[i] + hist[i]; s[i + 1] = s[i] + i * hist[i]; }
  auto between = [&](int a, int b) {  // bins [a, b): w * mean^2
    double w = p[b] - p[a];
    return w > 0.0 ? (s[b] - s[a]) * (s[b] - s[a]) / w : 0.0;
  };
  double best = -1.0;
  int best_i = kBins / 3;
  for (int i = 1; i < kBins - 1; ++i) {
    for (int j = i + 1; j < kBins; ++j) {
      double score = between(0, i) + between(i, j) + between(j, kBins);
      if (score > best) { best = score; best_i = i; }
    }
  }
  return lo + best_i * (hi - lo) / (kBins - 1);
}

// Least-squares plane through the direct-exposure level, one pass of outlier rejection.
// A plane, not a higher order: it follows the heel effect yet never runs away outside the
// sampled area.
std::array<double, 6> FitSurface(const cv::Mat& log, const cv::Mat& mask) {
  std::vector<cv::Point> pts;
  cv::findNonZero(mask, pts);
  std::array<double, 6> q{};
  if (pts.empty()) return q;
  size_t stride = std::max<size_t>(1, pts.size() / 20000);
  std::vector<char> keep(pts.size(), 1);
  for (int pass = 0; pass < 2; ++pass) {
    cv::Mat a = cv::Mat::zeros(3, 3, CV_64F), b = cv::Mat::zeros(3, 1, CV_64F);
    for (size_t i = 0; i < pts.size(); i += stride) {
      if (!keep[i]) continue;
      double r[3] = {1.0, static_cast<double>(pts[i].x), static_cast<double>(pts[i].y)};
      double z = log.at<float>(pts[i]);
      for (int j = 0; j < 3; ++j) {
        b.at<double>(j) += r[j] * z;
        for (int k = 0; k < 3; ++k) a.at<double>(j, k) += r[j] * r[k];
      }
    }
    cv::Mat sol;
    if (!cv::solve(a, b, sol, cv::DECOMP_SVD)) return q;
    q = {sol.at<double>(0), sol.at<double>(1), sol.at<double>(2), 0.0, 0.0, 0.0};
    std::vector<float> res;
    for (size_t i = 0; i < pts.size(); i += stride) {
      res.push_back(static_cast<float>(log.at<float>(pts[i]) - SurfaceAt(q, pts[i].x, pts[i].y)));
    }
    double sigma = std::max(RobustSigma(res), 1e-6);
    for (size_t i = 0; i < pts.size(); i += stride) {
      double d = log.at<float>(pts[i]) - SurfaceAt(q, pts[i].x, pts[i].y);
      keep[i] = std::fabs(d) <= 3.0 * sigma;
    }
  }
  return q;
}

cv::Mat Disk(int radius) {
  return cv::getStructuringElement(cv::MORPH_ELLIPSE, cv::Size(2 * radius + 1, 2 * radius + 1));
}

// Share of the ring around `blob` (inside the field) that is direct exposure.
double DirectShareAround(const cv::Mat& blob, const cv::Mat& field, const cv::Mat& direct) {
  cv::Mat ring;
  cv::dilate(blob, ring, Disk(3));
  ring &= field;
  ring &= ~blob;
  int n = cv::countNonZero(ring);
  if (n == 0) return 0.0;
  return static_cast<double>(cv::countNonZero(ring & direct)) / n;
}

// Lead markers and shields: far darker than tissue, lying (mostly) in direct exposure.
// Implants are surrounded by tissue and stay. Returns the metal mask removed from `anatomy`.
cv::Mat RemoveMetal(const Working& w, Segmentation& s, const cv::Mat& direct, double min_px) {
  cv::Mat metal = cv::Mat::zeros(w.log.size(), CV_8U);
  cv::Mat outside;
  cv::Mat field_full = w.field.clone();
  cv::dilate(field_full, field_full, Disk(static_cast<int>(std::ceil(2 * w.erosion_px)) + 2));
  outside = ~field_full;
  std::vector<float> blocked = Values(w.log, outside);
  std::vector<float> open = Values(w.log, direct);
  double cut = -1e300;
  // Only a linear image keeps the blocked level physical; processing remaps it freely.
  if (w.linear && blocked.size() >= 100 && !open.empty()) {
    double lb = Median(blocked), ld = Median(open);
    if (ld - lb > 6.0 * std::max(s.noise, 1e-6)) cut = lb + 0.35 * (ld - lb);
  }
  // References for the relative tests: the largest piece of anatomy (the patient).
  cv::Mat labels, stats, centroids;
  int n = cv::connectedComponentsWithStats(s.anatomy, labels, stats, centroids, 8, CV_32S);
  int largest = 0;
  for (int i = 1; i < n; ++i) {
    if (largest == 0 || stats.at<int>(i, cv::CC_STAT_AREA) > stats.at<int>(largest, cv::CC_STAT_AREA)) {
      largest = i;
    }
  }
  std::vector<float> body = largest ? Values(s.residual, labels == largest) : std::vector<float>{};
  double body_median = Median(body);
  int thin_radius = std::max(2, static_cast<int>(std::lround(5.0 * std::sqrt(min_px / 10.0))));
  double body_p90 = Quantile(body, 0.9);
  for (int i = 1; i < n; ++i) {
    int area = stats.at<int>(i, cv::CC_STAT_AREA);
    if (i == largest || area > 150 * min_px) continue;  // markers are under 1500 mm2
    cv::Mat blob = labels == i;
    double blob_log = Median(Values(w.log, blob));
    double blob_r = Median(Values(s.residual, blob));
    // Lead is darker than the patient's typical tissue whatever the processing; a loose bit of
    // soft tissue is lighter.
    // Lead letters are strokes a few mm wide: a 10 mm opening removes them, not a finger or
    // a thumb cut off from the hand by the segmentation.
    cv::Mat opened;
    cv::morphologyEx(blob, opened, cv::MORPH_OPEN, Disk(thin_radius));
    bool thin = cv::countNonZero(opened) == 0;
    bool dark = blob_log < cut || blob_r > 1.5 * body_p90 || (thin && blob_r > body_median);
    if (!dark || DirectShareAround(blob, w.field, direct) < 0.6) continue;
    metal |= blob;
  }
  // Metal touching the body (a marker on the skin line, a shield across the field edge):
  // pixels at the blocked level whose surroundings are partly direct exposure.
  if (cut > -1e300) {
    cv::Mat dark = (w.log < cut) & w.field;
    n = cv::connectedComponentsWithStats(dark, labels, stats, centroids, 8, CV_32S);
    for (int i = 1; i < n; ++i) {
      int area = stats.at<int>(i, cv::CC_STAT_AREA);
      if (area < 2 || area > 800 * min_px) continue;  // 8000 mm2: larger is a body, not lead
      cv::Mat blob = labels == i;
      if (DirectShareAround(blob, w.field, direct) >= 0.4) metal |= blob;
    }
  }
  if (cv::countNonZero(metal) > 0) {
    cv::Mat grown;
    cv::dilate(metal, grown, Disk(2));  // the blurred rim of the metal edge
    s.anatomy &= ~grown;
    s.markers_removed = cv::connectedComponents(metal, labels, 8) - 1;
  }
  return metal;
}

// Grows the direct exposure from its confident core through small steps only: processing
// (unsharp masking, equalisation) shades the open field smoothly, while the skin line is a
// step. Tissue stays out because every path into it crosses that step.
cv::Mat GrowDirect(const Working& w, const Segmentation& s, const cv::Mat& seeds) {
  std::vector<float> diffs;
  for (int y = 0; y < w.log.rows; ++y) {
    for (int x = 0; x + 1 < w.log.cols; ++x) {
      if (seeds.at<uchar>(y, x) && seeds.at<uchar>(y, x + 1)) {
        diffs.push_back(w.log.at<float>(y, x + 1) - w.log.at<float>(y, x));
      }
    }
  }
  double step = std::max(4.0 * RobustSigma(diffs), 0.05 * s.tissue_level);
  double bound = std::min(0.6 * s.tissue_level, 2.0 * s.threshold);
  cv::Mat grown = seeds.clone();
  std::vector<cv::Point> queue;
  cv::findNonZero(seeds, queue);
  const int dx[4] = {1, -1, 0, 0}, dy[4] = {0, 0, 1, -1};
  for (size_t i = 0; i < queue.size(); ++i) {
    cv::Point p = queue[i];
    float lp = w.log.at<float>(p);
    for (int k = 0; k < 4; ++k) {
      cv::Point q(p.x + dx[k], p.y + dy[k]);
      if (q.x < 0 || q.y < 0 || q.x >= w.log.cols || q.y >= w.log.rows) continue;
      if (grown.at<uchar>(q) || !w.field.at<uchar>(q)) continue;
      if (std::fabs(w.log.at<float>(q) - lp) > step || s.residual.at<float>(q) > bound) continue;
      grown.at<uchar>(q) = 255;
      queue.push_back(q);
    }
  }
  return grown;
}

void RemoveSmall(cv::Mat& mask, double min_px) {
  cv::Mat labels, stats, centroids;
  int n = cv::connectedComponentsWithStats(mask, labels, stats, centroids, 8, CV_32S);
  for (int i = 1; i < n; ++i) {
    if (stats.at<int>(i, cv::CC_STAT_AREA) < min_px) mask.setTo(0, labels == i);
  }
}

// Local direct-exposure level: a normalised convolution (Knutsson and Westin 1993) of the log
// image over the direct exposure's core, blended into the plane where no direct exposure lies
// within reach. Image processing (unsharp masking, equalisation) shades the open field smoothly
// over a few centimetres, most strongly beside the skin line and the blade shadows; a plane
// cannot follow that, and the shading then passes for attenuation spread, raising the tissue
// threshold above thin soft tissue (fingers, the skin over a knee or a foot). Measured against
// the open field right beside it, the skin line keeps its full step.
cv::Mat LocalBackground(const Working& w, const cv::Mat& direct, const std::array<double, 6>& plane,
                        double working_mm) {
  cv::Mat core;
  cv::erode(direct, core, Disk(std::max(1, static_cast<int>(std::lround(2.0 / working_mm)))));
  if (cv::countNonZero(core) < 20) return {};
  cv::Mat weight, value, logs;
  core.convertTo(weight, CV_32F, 1.0 / 255.0);
  logs = w.log.mul(weight);
  // Shading varies over centimetres, noise over pixels: the two maps are averaged onto a 4 mm
  // grid, blurred there (sigma 8 mm in all) and interpolated back, which costs a small
  // fraction of a full-resolution blur with a 49-tap kernel.
  constexpr double kCoarseMm = 4.0, kSigmaMm = 8.0;
  int f = std::max(1, static_cast<int>(std::lround(kCoarseMm / working_mm)));
  cv::Size coarse(std::max(1, (w.log.cols + f - 1) / f), std::max(1, (w.log.rows + f - 1) / f));
  cv::Mat cw, cv_;
  cv::resize(weight, cw, coarse, 0, 0, cv::INTER_AREA);
  cv::resize(logs, cv_, coarse, 0, 0, cv::INTER_AREA);
  const double sigma = std::sqrt(std::max(kSigmaMm * kSigmaMm - kCoarseMm * kCoarseMm / 12.0, 1.0)) /
                       (working_mm * f);  // the averaging adds a 4 mm box's variance, 16 / 12 mm2
  cv::GaussianBlur(cw, cw, cv::Size(0, 0), sigma, sigma, cv::BORDER_CONSTANT);
  cv::GaussianBlur(cv_, cv_, cv::Size(0, 0), sigma, sigma, cv::BORDER_CONSTANT);
  cv::resize(cw, weight, w.log.size(), 0, 0, cv::INTER_LINEAR);
  cv::resize(cv_, value, w.log.size(), 0, 0, cv::INTER_LINEAR);
  cv::Mat out(w.log.size(), CV_32F);
  constexpr double kReach = 0.1;  // weight below which the neighbourhood holds too little
  for (int y = 0; y < out.rows; ++y) {
    const float* wt = weight.ptr<float>(y);
    const float* v = value.ptr<float>(y);
    float* o = out.ptr<float>(y);
    for (int x = 0; x < out.cols; ++x) {
      double p = SurfaceAt(plane, x, y);
      double a = std::clamp(wt[x] / kReach, 0.0, 1.0);
      double local = wt[x] > 1e-6 ? v[x] / wt[x] : p;
      o[x] = static_cast<float>(a * local + (1.0 - a) * p);
    }
  }
  return out;
}

// True when the field holds nothing but noise and smooth shading: the spread of the
// plane-corrected values is within a few times the pixel-to-pixel noise.
bool IsFlat(const Working& w) {
  std::array<double, 6> q = FitSurface(w.log, w.field);
  std::vector<float> res, diff;
  for (int y = 0; y < w.log.rows; ++y) {
    for (int x = 0; x + 1 < w.log.cols; ++x) {
      if (!w.field.at<uchar>(y, x)) continue;
      res.push_back(static_cast<float>(w.log.at<float>(y, x) - SurfaceAt(q, x, y)));
      if (w.field.at<uchar>(y, x + 1)) diff.push_back(w.log.at<float>(y, x + 1) - w.log.at<float>(y, x));
    }
  }
  double noise = RobustSigma(diff) / std::sqrt(2.0);
  double spread = (Quantile(res, 0.95) - Quantile(res, 0.05)) / 3.29;  // sigma if Gaussian
  return spread < 3.0 * std::max(noise, 1e-9);
}


// Pixel-to-pixel noise of the working image inside the field: robust spread of horizontal
// neighbour differences / sqrt(2). Smooth shading and anatomy barely change it.
double PixelNoise(const Working& w) {
  std::vector<float> diff;
  for (int y = 0; y < w.log.rows; ++y) {
    const float* l = w.log.ptr<float>(y);
    const uchar* m = w.field.ptr<uchar>(y);
    for (int x = 0; x + 1 < w.log.cols; ++x) {
      if (m[x] && m[x + 1]) diff.push_back(l[x + 1] - l[x]);
    }
  }
  return RobustSigma(diff) / std::sqrt(2.0);
}

// A candidate direct-exposure mask with its plane, attenuation and the step at its border.
struct Candidate {
  cv::Mat mask;
  std::array<double, 6> surface{};
  cv::Mat residual;
  double noise = 0.0;    // robust sigma of the attenuation inside the mask
  double step = 0.0;     // rise of the attenuation just outside the mask, in units of noise
  bool patient = false;  // something wider than lead strokes or a plate lies outside the mask
  bool touches_edge = false;
  int area = 0;
  cv::Mat background;    // local direct-exposure level, when LocalStep measured it
};

// The skin line is a step: 1-3 mm outside direct exposure the attenuation has already risen
// far above the noise. Splitting tissue from tissue leaves no such step (the thickness varies
// continuously), and a split that only cuts out markers or implants leaves nothing but thin
// objects outside (a 10 mm opening removes lead letters, plates and screws, not a finger).
Candidate Evaluate(const Working& w, const cv::Mat& mask, double pixel_noise, double working_mm) {
  Candidate c;
  c.mask = mask;
  c.area = cv::countNonZero(mask);
  c.surface = FitSurface(w.log, c.area > 0 ? mask : w.field);
  c.residual = cv::Mat(w.log.size(), CV_32F);
  for (int y = 0; y < w.log.rows; ++y) {
    const float* l = w.log.ptr<float>(y);
    float* r = c.residual.ptr<float>(y);
    for (int x = 0; x < w.log.cols; ++x) r[x] = static_cast<float>(SurfaceAt(c.surface, x, y) - l[x]);
  }
  std::vector<float> in = Values(c.residual, mask);
  c.noise = std::max(RobustSigma(in), pixel_noise);
  cv::Mat near, far;
  int r1 = std::max(1, static_cast<int>(std::lround(1.0 / working_mm)));
  int r3 = std::max(r1 + 1, static_cast<int>(std::lround(3.0 / working_mm)));
  cv::dilate(mask, near, Disk(r1));
  cv::dilate(mask, far, Disk(r3));
  cv::Mat ring = far & ~near & w.field;
  if (cv::countNonZero(ring) >= 10 && c.noise > 0.0) {
    c.step = (Median(Values(c.residual, ring)) - Median(in)) / c.noise;
  }
  cv::Mat outside = w.field & ~mask, opened;
  int r5 = std::max(2, static_cast<int>(std::lround(5.0 / working_mm)));
  cv::morphologyEx(outside, opened, cv::MORPH_OPEN, Disk(r5));
  c.patient = cv::countNonZero(opened) > 0;
  cv::Mat inner;
  cv::erode(w.field, inner, Disk(1));
  c.touches_edge = cv::countNonZero(mask & ~inner) >= 3;
  return c;
}

constexpr double kMinStep = 4.5;  // attenuation step at the skin line, in noise units
// Pieces of direct exposure differ by the heel effect and shading: a tenth of the field's range.
constexpr double kSameLevel = 0.1;
// Direct exposure found only by splitting a class that held tissue too must be as flat as the
// pixel noise and bounded by a step more than twice kMinStep: the split of a smooth thickness
// profile is neither.
constexpr double kFlatNoise = 1.5;
constexpr double kClearStep = 10.0;
// Median attenuation of tissue split off the direct exposure, in noise units: the upper half
// of the open field's own noise lies about 1 sigma above its lower half.
constexpr double kMinRemoved = 2.0;

// The step at a candidate's border measured against the open field right beside it (the local
// background) instead of one plane: processing shades the open field over centimetres, which a
// plane leaves in the spread and so hides a faint skin line.
// `removed` (optional) is the part of the previous candidate left outside this one: it must be
// attenuating like tissue (its median at least kMinRemoved noise units above the open field),
// else the split only divided the open field's noise or shading and the step is 0.
// The local background is kept in the candidate, as Segment needs it again if it is chosen.
double LocalStep(const Working& w, Candidate& c, double pixel_noise, double working_mm,
                 const cv::Mat& removed) {
  c.background = LocalBackground(w, c.mask, c.surface, working_mm);
  if (c.background.empty()) return 0.0;
  cv::Mat residual = c.background - w.log;
  std::vector<float> in = Values(residual, c.mask);
  double noise = std::max(RobustSigma(in), pixel_noise);
  if (!removed.empty() && cv::countNonZero(removed) > 0 &&
      (Median(Values(residual, removed)) - Median(in)) < kMinRemoved * noise) {
    return 0.0;
  }
  cv::Mat near, far;
  int r1 = std::max(1, static_cast<int>(std::lround(1.0 / working_mm)));
  int r3 = std::max(r1 + 1, static_cast<int>(std::lround(3.0 / working_mm)));
  cv::dilate(c.mask, near, Disk(r1));
  cv::dilate(c.mask, far, Disk(r3));
  cv::Mat ring = far & ~near & w.field;
  if (cv::countNonZero(ring) < 10 || !(noise > 0.0)) return 0.0;
  return (Median(Values(residual, ring)) - Median(in)) / noise;
}

// The pieces of `mask` as light as its lightest piece: direct exposure lies at one level (up
// to the heel effect and processing), wherever it appears beside the patient. A split of the
// attenuation left by a plane can also take in a strip of thick tissue far from where the
// plane was fitted; that strip is far darker in the image itself.
cv::Mat BrightestPieces(const Working& w, const cv::Mat& mask, double log_range) {
  cv::Mat labels, stats, centroids;
  int n = cv::connectedComponentsWithStats(mask, labels, stats, centroids, 8, CV_32S);
  if (n <= 2) return mask;
  std::vector<double> level(n, -1e300);
  double lightest = -1e300;
  for (int i = 1; i < n; ++i) {
    if (stats.at<int>(i, cv::CC_STAT_AREA) < 20) continue;
    level[i] = Median(Values(w.log, labels == i));
    lightest = std::max(lightest, level[i]);
  }
  cv::Mat out = cv::Mat::zeros(mask.size(), CV_8U);
  for (int i = 1; i < n; ++i) {
    if (level[i] >= lightest - kSameLevel * log_range) out.setTo(255, labels == i);
  }
  return out;
}

// Direct exposure: not a sliver, with a clear step at its border, beside a patient, and
// reaching the field edge (air surrounds the patient) or large.
bool Plausible(const Candidate& c, int field_px) {
  return c.area >= std::max(20.0, 0.01 * field_px) && c.step >= kMinStep && c.patient &&
         (c.touches_edge || c.area > 0.15 * field_px);
}
}  // namespace

double SurfaceAt(const std::array<double, 6>& q, double x, double y) {
  return q[0] + q[1] * x + q[2] * y + q[3] * x * x + q[4] * x * y + q[5] * y * y;
}

double LevelAt(const Segmentation& s, double x, double y) {
  const cv::Mat& b = s.background;
  if (b.empty()) return SurfaceAt(s.surface, x, y);
  x = std::clamp(x, 0.0, b.cols - 1.0);
  y = std::clamp(y, 0.0, b.rows - 1.0);
  int x0 = std::min(static_cast<int>(x), b.cols - 1), y0 = std::min(static_cast<int>(y), b.rows - 1);
  int x1 = std::min(x0 + 1, b.cols - 1), y1 = std::min(y0 + 1, b.rows - 1);
  double fx = x - x0, fy = y - y0;
  double top = (1.0 - fx) * b.at<float>(y0, x0) + fx * b.at<float>(y0, x1);
  double bottom = (1.0 - fx) * b.at<float>(y1, x0) + fx * b.at<float>(y1, x1);
  return (1.0 - fy) * top + fy * bottom;
}

Working MakeWorking(const Image& image, const FieldMeasurement& field,
                    const std::array<double, 2>& spacing, bool linear, double working_mm) {
  Working w;
  cv::Mat full(image.height(), image.width(), CV_32F, const_cast<float*>(image.data()));
  int cols = std::max(1, static_cast<int>(std::lround(image.width() * spacing[1] / working_mm)));
  int rows = std::max(1, static_cast<int>(std::lround(image.height() * spacing[0] / working_mm)));
  cols = std::min(cols, image.width());
  rows = std::min(rows, image.height());
  cv::Mat small;
  cv::resize(full, small, cv::Size(cols, rows), 0, 0, cv::INTER_AREA);
  w.fx = static_cast<double>(image.width()) / cols;
  w.fy = static_cast<double>(image.height()) / rows;
  w.log = small;
  w.linear = linear;
  // Electronically masked areas are exactly constant: no pixel there saw the beam.
  cv::Mat constant;
  if (field.blanked) {
    cv::Mat lo, hi;
    cv::erode(small, lo, cv::Mat());
    cv::dilate(small, hi, cv::Mat());
    constant = (hi - lo) == 0;
  }
  for (int y = 0; y < rows; ++y) {
    float* p = w.log.ptr<float>(y);
    for (int x = 0; x < cols; ++x) p[x] = ToLog(p[x], linear);
  }
  w.field = cv::Mat::zeros(rows, cols, CV_8U);
  if (field.polygon_px.size() >= 3) {
    constexpr int kShift = 4;
    std::vector<cv::Point> pts;
    for (const Point2d& p : field.polygon_px) {
      pts.emplace_back(static_cast<int>(std::lround(p.x / w.fx * (1 << kShift))),
                       static_cast<int>(std::lround(p.y / w.fy * (1 << kShift))));
    }
    std::vector<std::vector<cv::Point>> polys{pts};
    cv::fillPoly(w.field, polys, cv::Scalar(255), cv::LINE_8, kShift);
  }
  // Past the 90 % point of the penumbra, plus the mixing of the area-averaged working pixels.
  double penumbra_mm = 0.0;
  for (const SideMeasurement& s : field.sides) {
    if (s.visible && s.penumbra_px) {
      penumbra_mm = std::max(penumbra_mm, *s.penumbra_px * 0.5 * (spacing[0] + spacing[1]));
    }
  }
  penumbra_mm = std::min(penumbra_mm, 15.0);
  w.erosion_px = std::ceil((0.75 * penumbra_mm + 1.5) / working_mm) + 1.0;
  cv::erode(w.field, w.field, Disk(static_cast<int>(w.erosion_px)));
  if (!constant.empty()) {
    cv::dilate(constant, constant, Disk(static_cast<int>(w.erosion_px)));
    w.field &= ~constant;
  }
  return w;
}

Segmentation Segment(const Working& w, const std::array<double, 2>& spacing, double working_mm) {
  Segmentation s;
  s.anatomy = cv::Mat::zeros(w.log.size(), CV_8U);
  s.metal = cv::Mat::zeros(w.log.size(), CV_8U);
  s.residual = cv::Mat::zeros(w.log.size(), CV_32F);
  int field_px = cv::countNonZero(w.field);
  if (field_px < 20) return s;
  const double pixel_noise = PixelNoise(w);
  std::vector<float> field_values = Values(w.log, w.field);
  const double log_range = Quantile(field_values, 0.99) - Quantile(field_values, 0.01);
  // Two candidates for the direct exposure: the bright class of a two-class split of the
  // values, and the least attenuated class of a three-class split of the attenuation left by
  // the first one's plane (which separates direct exposure from thin soft tissue where bone or
  // metal would otherwise take the dark class alone). The purer three-class candidate is
  // preferred when it is plausible; neither is taken when neither has a skin-line step.
  cv::Mat bright = (w.log > OtsuThreshold(Values(w.log, w.field))) & w.field;
  if (cv::countNonZero(bright) == 0) bright = w.field.clone();
  Candidate two = Evaluate(w, bright, pixel_noise, working_mm);
  cv::Mat least = (two.residual < LowerOtsu3Threshold(Values(two.residual, w.field))) & w.field;
  Candidate three = Evaluate(w, least, pixel_noise, working_mm);
  const Candidate* chosen = Plausible(three, field_px) ? &three
                            : Plausible(two, field_px) ? &two : nullptr;
  s.step = std::max(three.step, two.step);
  // Thin soft tissue (a foot's or a hand's outline on a processed image) can be so faint that
  // it falls into the least attenuated class with the direct exposure. Direct exposure is the
  // least attenuated region bounded by a step, so the split is repeated inside the chosen
  // candidate while its lighter part is itself plausible direct exposure. A split of smooth
  // shading alone fails the step test: its border is a gentle slope, not a step.
  // When neither candidate is plausible, the same split is tried from the smaller one, up to
  // four times: an open strip along one blade beside a thick limb shares its class with the
  // limb's thin flank, whose spread hides the skin line. Only pieces as light as the lightest
  // are kept at each split, and the result must be flat and clearly stepped (kFlatNoise,
  // kClearStep).
  Candidate inner;
  const Candidate* from = chosen ? chosen
                          : (three.area > 0 && three.area < two.area ? &three : &two);
  for (int round = 0; round < (chosen ? 2 : 4); ++round) {
    std::vector<float> values = Values(from->residual, from->mask);
    cv::Mat sub = (from->residual < OtsuThreshold(values)) & from->mask;
    cv::morphologyEx(sub, sub, cv::MORPH_OPEN, Disk(1));  // a split of noise is speckle
    if (!chosen) sub = BrightestPieces(w, sub, log_range);
    Candidate next = Evaluate(w, sub, pixel_noise, working_mm);
    next.step = LocalStep(w, next, pixel_noise, working_mm, from->mask & ~sub);
    if (next.area == 0 || next.area >= from->area) break;
    const bool flat_and_stepped =
        next.noise <= kFlatNoise * pixel_noise && next.step >= kClearStep;
    const bool direct = Plausible(next, field_px) && (chosen || flat_and_stepped);
    if (chosen && !direct) break;
    inner = std::move(next);
    from = &inner;
    if (direct) chosen = &inner;
  }
  s.direct_found = chosen != nullptr;
  const Candidate& c = chosen ? *chosen : two;
  s.surface = c.surface;
  s.residual = c.residual;
  s.noise = c.noise;
  s.tissue_level = Median(Values(s.residual, w.field & ~c.mask));
  double min_px = std::max(4.0, 10.0 / (working_mm * working_mm));  // 10 mm2
  if (!s.direct_found) {
    // No direct exposure at all: the field lies within the body and the anatomy fills it,
    // unless the field is flat (nothing in the beam, e.g. a detector test exposure).
    if (IsFlat(w)) return s;
    s.anatomy = w.field.clone();
    s.threshold = 0.0;
    return s;
  }
  s.background = c.background.empty() ? LocalBackground(w, c.mask, c.surface, working_mm)
                                       : c.background;
  if (!s.background.empty()) {
    s.residual = s.background - w.log;
    s.noise = std::max(RobustSigma(Values(s.residual, c.mask)), pixel_noise);
    s.tissue_level = Median(Values(s.residual, w.field & ~c.mask));
  }
  s.threshold = std::clamp(std::max(5.0 * s.noise, 0.1 * s.tissue_level), 0.0,
                           0.5 * s.tissue_level);
  cv::Mat direct = GrowDirect(w, s, (s.residual <= s.threshold) & w.field);
  s.direct = direct;
  s.anatomy = w.field & ~direct;
  cv::morphologyEx(s.anatomy, s.anatomy, cv::MORPH_OPEN, Disk(1));
  s.metal = RemoveMetal(w, s, direct, min_px);
  cv::morphologyEx(s.anatomy, s.anatomy, cv::MORPH_OPEN, Disk(1));
  RemoveSmall(s.anatomy, min_px);
  (void)spacing;
  return s;
}

}  // namespace beamtrim::anatomy_internal
