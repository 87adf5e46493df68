// Candidate blade lines at working resolution: the field angle from a polarity-signed Hough
// accumulator, then, in a frame aligned with that angle, boundary positions per side and the
// evidence that a boundary is a blade shadow rather than an anatomy edge or an object.
#include <algorithm>
#include <cmath>
#include <numeric>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "analysis/field_internal.h"

namespace beamtrim::field_internal {
namespace {

constexpr double kDeg = M_PI / 180.0;

double Median(std::vector<double>& v) {
  if (v.empty()) return 0.0;
  auto mid = v.begin() + v.size() / 2;
  std::nth_element(v.begin(), mid, v.end());
  return *mid;
}

// Access to frame pixels by (depth k from the boundary, along-edge index t) for one side.
// k >= 0 on the outside counts away from the field; inside it counts into the field.
struct SideView {
  const Frame& f;
  Side side;
  int p;
  bool vertical() const { return side == Side::kLeft || side == Side::kRight; }
  int along_size() const { return vertical() ? f.value.rows : f.value.cols; }
  int across_size() const { return vertical() ? f.value.cols : f.value.rows; }
  // Index across the edge of the k-th pixel outside (outside=true) or inside.
  int Across(int k, bool outside) const {
    const bool low_is_outside = side == Side::kLeft || side == Side::kTop;
    if (low_is_outside == outside) return p - 1 - k;
    return p + k;
  }
  // Sums of the strips [gap, gap + band) pixels outside and inside the edge at along-index t.
  struct Strips {
    double out_sum = 0.0, in_sum = 0.0;
    int out_n = 0, in_n = 0;
  };
  Strips SumStrips(int t, int gap, int band) const {
    Strips s;
    for (int k = gap; k < gap + band; ++k) {
      float v;
      if (Get(f.value, k, t, true, &v)) { s.out_sum += v; ++s.out_n; }
      if (Get(f.value, k, t, false, &v)) { s.in_sum += v; ++s.in_n; }
    }
    return s;
  }
  bool Get(const cv::Mat1f& m, int k, int t, bool outside, float* out) const {
    const int a = Across(k, outside);
    if (a < 0 || a >= across_size() || t < 0 || t >= along_size()) return false;
    const int row = vertical() ? t : a;
    const int col = vertical() ? a : t;
    if (!f.valid(row, col)) return false;
    *out = m(row, col);
    return true;
  }
};

}  // namespace

Frame MakeFrame(const WorkingImage& working, const cv::Mat1f& grad, double angle_deg) {
  Frame f;
  f.angle_deg = angle_deg;
  const double c = std::cos(angle_deg * kDeg), s = std::sin(angle_deg * kDeg);
  const double W = working.value.cols, H = working.value.rows;
  double umin = 1e300, umax = -1e300, vmin = 1e300, vmax = -1e300;
  for (auto [x, y] : {std::pair{0.0, 0.0}, {W, 0.0}, {0.0, H}, {W, H}}) {
    umin = std::min(umin, x * c + y * s);
    umax = std::max(umax, x * c + y * s);
    vmin = std::min(vmin, -x * s + y * c);
    vmax = std::max(vmax, -x * s + y * c);
  }
  f.u0 = std::floor(umin);
  f.v0 = std::floor(vmin);
  const int cols = static_cast<int>(std::ceil(umax - f.u0));
  const int rows = static_cast<int>(std::ceil(vmax - f.v0));
  // dst(i, j) = src(M (i, j, 1)): x = u c - v s, y = u s + v c, pixel centres at +0.5.
  const double uc = f.u0 + 0.5, vc = f.v0 + 0.5;
  cv::Matx23d m(c, -s, uc * c - vc * s - 0.5, s, c, uc * s + vc * c - 0.5);
  const int flags = cv::INTER_LINEAR | cv::WARP_INVERSE_MAP;
  cv::warpAffine(working.value, f.value, m, cv::Size(cols, rows), flags, cv::BORDER_REPLICATE);
  cv::warpAffine(grad, f.grad, m, cv::Size(cols, rows), flags, cv::BORDER_REPLICATE);
  cv::Mat1f valid_f;
  working.valid.convertTo(valid_f, CV_32F, 1.0 / 255.0);
  cv::warpAffine(valid_f, valid_f, m, cv::Size(cols, rows), flags, cv::BORDER_CONSTANT, 0.0);
  f.valid = valid_f > 0.999f;
  return f;
}

std::vector<double> CandidateAngles(const WorkingImage& working, const cv::Mat1f& gx,
                                    const cv::Mat1f& gy, int count) {
  constexpr double kBin = 0.5;      // degrees per angle bin
  constexpr double kTol = 1.5;      // a gradient votes for angles within this of its own
  constexpr int kAngles = 180;      // [-45, 45) in 0.5 degree bins
  const int W = gx.cols, H = gx.rows;
  const int diag = static_cast<int>(std::ceil(std::hypot(W, H))) + 2;
  const int offsets = 2 * diag;
  cv::Mat1f mag;
  cv::magnitude(gx, gy, mag);
  const double thr = std::max(Percentile(mag, working.valid, 85.0),
                              0.02 * (working.hi - working.lo));
  // acc[(angle * 4 + family_sign) * offsets + offset]
  std::vector<float> acc(static_cast<size_t>(kAngles) * 4 * offsets, 0.0f);
  for (int y = 0; y < H; ++y) {
    for (int x = 0; x < W; ++x) {
      const float m = mag(y, x);
      if (m <= thr || !working.valid(y, x)) continue;
      const double phi = std::atan2(gy(y, x), gx(y, x)) / kDeg;
      const double psi = phi - 90.0 * std::floor((phi + 45.0) / 90.0);  // [-45, 45)
      for (int b = static_cast<int>(std::floor((psi - kTol + 45.0) / kBin));
           b <= static_cast<int>(std::ceil((psi + kTol + 45.0) / kBin)); ++b) {
        const int bin = ((b % kAngles) + kAngles) % kAngles;
        const double a = -45.0 + bin * kBin;
        double d = std::fmod(psi - a + 405.0, 90.0) - 45.0;  // circular distance mod 90
        if (std::fabs(d) > kTol) continue;
        const int q = static_cast<int>(std::lround((phi - a) / 90.0));
        const int fam_sign = ((q % 4) + 4) % 4;  // 0: +n1, 1: +n2, 2: -n1, 3: -n2
        const double ca = std::cos(a * kDeg), sa = std::sin(a * kDeg);
        const double px = x + 0.5, py = y + 0.5;
        const double off = (fam_sign % 2 == 0) ? px * ca + py * sa : -px * sa + py * ca;
        const int o = std::clamp(static_cast<int>(std::lround(off)) + diag, 0, offsets - 1);
        acc[(static_cast<size_t>(bin) * 4 + fam_sign) * offsets + o] += m;
      }
    }
  }
  std::vector<double> score(kAngles, 0.0);
  for (int bin = 0; bin < kAngles; ++bin) {
    for (int fs = 0; fs < 4; ++fs) {
      const float* a = &acc[(static_cast<size_t>(bin) * 4 + fs) * offsets];
      double best = 0.0;
      for (int o = 1; o + 1 < offsets; ++o) best = std::max(best, double(a[o - 1] + a[o] + a[o + 1]));
      score[bin] += best;
    }
  }
  std::vector<int> order(kAngles);
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(), [&](int a, int b) { return score[a] > score[b]; });
  std::vector<double> out;
  for (int bin : order) {
    if (static_cast<int>(out.size()) >= count || score[bin] <= 0.0) break;
    const double a = -45.0 + bin * kBin;
    bool near = false;
    for (double o : out) near |= std::fabs(std::fmod(a - o + 405.0, 90.0) - 45.0) < 4.0;
    if (!near) out.push_back(a);
  }
  return out;
}

std::vector<int> SideCandidates(const Frame& frame, Side side, Span span, int count) {
  SideView view{frame, side, 0};
  const int n = view.across_size();
  std::vector<double> e(n + 1, 0.0);
  for (int p = 1; p < n; ++p) {
    view.p = p;
    double sum = 0.0;
    for (int t = std::max(0, span.lo); t < std::min(span.hi, view.along_size()); ++t) {
      float in, out;
      if (view.Get(frame.value, 0, t, false, &in) && view.Get(frame.value, 0, t, true, &out)) {
        sum += in - out;
      }
    }
    e[p] = sum;
  }
  std::vector<double> smooth(e.size(), 0.0);
  for (int p = 1; p < n; ++p) smooth[p] = 0.25 * e[p - 1] + 0.5 * e[p] + 0.25 * e[p + 1];
  std::vector<int> peaks;
  for (int p = 1; p < n; ++p) {
    if (smooth[p] > 0.0 && smooth[p] >= smooth[p - 1] && smooth[p] >= smooth[p + 1]) {
      peaks.push_back(p);
    }
  }
  std::sort(peaks.begin(), peaks.end(), [&](int a, int b) { return smooth[a] > smooth[b]; });
  if (static_cast<int>(peaks.size()) > count) peaks.resize(count);
  return peaks;
}

Span StepSpan(const Frame& frame, Side side, int position, Span span) {
  SideView view{frame, side, position};
  const int gap = 2, band = 4;
  const int lo = std::max(0, span.lo), hi = std::min(span.hi, view.along_size());
  std::vector<double> d(std::max(0, hi - lo), 0.0);
  std::vector<double> present;
  for (int t = lo; t < hi; ++t) {
    const SideView::Strips st = view.SumStrips(t, gap, band);
    if (st.out_n == 0 || st.in_n == 0) continue;
    d[t - lo] = st.in_sum / st.in_n - st.out_sum / st.out_n;
    present.push_back(d[t - lo]);
  }
  if (present.size() < 3) return span;
  std::sort(present.begin(), present.end());
  const double strong = present[(present.size() * 9) / 10];
  if (strong <= 0.0) return span;
  // Longest run of a step at least half the strong one, bridging gaps of a few pixels (a
  // marker or an implant on the edge).
  const int bridge = 3;
  int best_lo = 0, best_hi = 0, run_lo = -1, last = -1000;
  for (int i = 0; i < static_cast<int>(d.size()); ++i) {
    if (d[i] < 0.5 * strong) continue;
    if (i - last > bridge + 1) run_lo = i;
    last = i;
    if (last + 1 - run_lo > best_hi - best_lo) { best_lo = run_lo; best_hi = last + 1; }
  }
  if (best_hi <= best_lo) return span;
  return {lo + best_lo, lo + best_hi};
}

SideEvidence EvaluateSide(const Frame& frame, Side side, int position, Span span, double range,
                          double depth_px, bool bounded) {
  // A blade edge runs at least a centimetre or so: shorter straight steps are objects.
  const int min_length_px = std::max(3, static_cast<int>(std::lround(depth_px / 4.0)));
  SideEvidence ev;
  ev.position = position;
  SideView view{frame, side, position};
  const int gap = 2;  // skips the penumbra and the working-resolution blur
  const int band = 4;
  const int depth = std::max(gap + band + 1, static_cast<int>(std::lround(depth_px)));
  std::vector<double> outs, ins, diffs, far;
  for (int t = std::max(0, span.lo); t < std::min(span.hi, view.along_size()); ++t) {
    const SideView::Strips st = view.SumStrips(t, gap, band);
    double so = st.out_sum, si = st.in_sum;
    int no = st.out_n, ni = st.in_n;
    // A blade shadow within a few millimetres of the image border: the strip just outside
    // the edge is all there is of the blocked plateau.
    for (int k = gap - 1; no == 0 && k >= 1; --k) {
      float v;
      if (view.Get(frame.value, k, t, true, &v)) { so += v; ++no; }
    }
    // Next to the image border the outside strip may be narrower than the band.
    if (no == 0 || ni < band / 2) continue;
    outs.push_back(so / no);
    ins.push_back(si / ni);
    diffs.push_back(si / ni - so / no);
    for (int k = gap + band; k < depth; ++k) {
      float v;
      if (view.Get(frame.value, k, t, true, &v)) far.push_back(v);
    }
  }
  if (diffs.size() < 3) {
    ev.why_not = "edge too short";
    return ev;
  }
  std::vector<double> tmp = outs;
  ev.outside = Median(tmp);
  // The open level: upper quartile of the inside strip, because part of the edge may run
  // under the perpendicular blades (dark on both sides) and must not dilute it.
  tmp = ins;
  std::nth_element(tmp.begin(), tmp.begin() + (3 * tmp.size()) / 4, tmp.end());
  ev.inside = tmp[(3 * tmp.size()) / 4];
  ev.step = ev.inside - ev.outside;
  if (ev.step <= 0.0) {
    ev.why_not = "no step";
    return ev;
  }
  // Support: of the positions where the inside is open, the share with the dark outside.
  int open = 0, supported = 0;
  for (size_t i = 0; i < diffs.size(); ++i) {
    if (ins[i] <= ev.outside + 0.5 * ev.step) continue;
    ++open;
    supported += diffs[i] > 0.5 * ev.step ? 1 : 0;
  }
  ev.support = open ? static_cast<double>(supported) / open : 0.0;
  // Coverage: where the inside is dense anatomy the step is smaller than next to the direct
  // beam but still plain; what a line at a wrong angle lacks is a blocked outside with any
  // clear rise into the field.
  int covered = 0;
  for (size_t i = 0; i < diffs.size(); ++i) {
    covered += (outs[i] < ev.outside + 0.3 * ev.step && diffs[i] > 0.15 * ev.step) ? 1 : 0;
  }
  ev.coverage = static_cast<double>(covered) / diffs.size();
  if (supported < min_length_px) {
    ev.why_not = "edge too short";
    return ev;
  }
  const double far_level = far.empty() ? ev.outside : Median(far);
  ev.flatness = (ev.outside - far_level) / ev.step;
  // The blade blocks its whole half-plane: test the outside strip over the full length.
  int n = 0, bright = 0, textured = 0;
  const double bright_level = ev.outside + 0.5 * ev.step;
  const double texture_level = 0.15 * ev.step;
  for (int t = 0; t < view.along_size(); ++t) {
    for (int k = gap; k < depth; ++k) {
      float v, g = 0.0f;
      if (!view.Get(frame.value, k, t, true, &v)) continue;
      view.Get(frame.grad, k, t, true, &g);
      ++n;
      bright += v > bright_level ? 1 : 0;
      textured += (k > gap && g > texture_level) ? 1 : 0;
    }
  }
  ev.bright = n ? static_cast<double>(bright) / n : 0.0;
  // The whole half-plane to the image border (every other pixel): a blade blocks all of it,
  // so brightness far beyond means either a second exposure or no blade at all.
  int nf = 0, bf = 0;
  for (int t = 0; t < view.along_size(); t += 2) {
    for (int k = gap; k < view.across_size(); k += 2) {
      float v;
      if (!view.Get(frame.value, k, t, true, &v)) continue;
      ++nf;
      bf += v > bright_level ? 1 : 0;
    }
  }
  ev.bright_far = nf ? static_cast<double>(bf) / nf : 0.0;
  ev.texture = n ? static_cast<double>(textured) / n : 0.0;
  const double rel = ev.step / std::max(1e-9, range);
  // Support counts most: a line at a slightly wrong angle still has a partial step, and only
  // a steep penalty lets the true angle win.
  const double sup2 = ev.support * ev.support;
  ev.score = rel * sup2 * sup2 * ev.coverage * ev.coverage * (1.0 - ev.bright) * (1.0 - ev.texture) *
             (1.0 - std::clamp(ev.flatness, 0.0, 1.0));
  if (rel < 0.08) ev.why_not = "contrast too low";
  else if (ev.support < 0.6) ev.why_not = "step along less than 60 % of the edge";
  else if (bounded && ev.coverage < 0.5) ev.why_not = "step along less than half of the field side";
  else if (ev.bright > 0.1) ev.why_not = "bright structures beyond the edge";
  else if (ev.texture > 0.12) ev.why_not = "structured (anatomy) beyond the edge";
  else if (ev.flatness > kMaxFallOff) ev.why_not = "no flat blocked plateau beyond the edge";
  ev.blade = ev.why_not.empty();
  return ev;
}

}  // namespace beamtrim::field_internal
