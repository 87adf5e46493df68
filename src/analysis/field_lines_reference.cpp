// The slow, obvious side kernels (field_lines_reference.h): the fast ones in field_lines.cpp
// must agree with these exactly.
#include "analysis/field_lines_reference.h"

#include <algorithm>
#include <cmath>
#include <numeric>

#include <opencv2/core.hpp>

namespace beamtrim::field_internal {

namespace {
constexpr double kDeg = M_PI / 180.0;
}  // namespace

std::vector<double> CandidateAnglesReference(const WorkingImage& working, const cv::Mat1f& gx,
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
  // acc[(angle * 4 + family_sign) * offsets + offset].
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

std::vector<int> SideCandidatesReference(const Frame& frame, Side side, Span span, int count) {
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
  return StrongestBoundaries(e, count);
}

Span StepSpanReference(const Frame& frame, Side side, int position, Span span) {
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
  // Longest run of a step at least half the strong one, bridging gaps of up to 3 pixels.
  int best_lo = 0, best_hi = 0;
  for (int i = 0; i < static_cast<int>(d.size()); ++i) {
    if (d[i] < 0.5 * strong) continue;
    // The run starting at i: extend while the next qualifying step is at most 4 away.
    int last = i;
    for (int j = i + 1; j < static_cast<int>(d.size()) && j - last <= 4; ++j) {
      if (d[j] >= 0.5 * strong) last = j;
    }
    if (last + 1 - i > best_hi - best_lo) { best_lo = i; best_hi = last + 1; }
  }
  if (best_hi <= best_lo) return span;
  return {lo + best_lo, lo + best_hi};
}

SideEvidence EvaluateSideReference(const Frame& frame, Side side, int position, Span span,
                                   double range, double depth_px, bool bounded) {
  SideView view{frame, side, position};
  const int gap = 2, band = 4;
  const int depth = std::max(gap + band + 1, static_cast<int>(std::lround(depth_px)));
  StripStats st;
  for (int t = std::max(0, span.lo); t < std::min(span.hi, view.along_size()); ++t) {
    const SideView::Strips s = view.SumStrips(t, gap, band);
    double so = s.out_sum, si = s.in_sum;
    int no = s.out_n, ni = s.in_n;
    for (int k = gap - 1; no == 0 && k >= 1; --k) {
      float v;
      if (view.Get(frame.value, k, t, true, &v)) {
        so += v;
        ++no;
      }
    }
    if (no == 0 || ni < band / 2) continue;
    st.outs.push_back(so / no);
    st.ins.push_back(si / ni);
    st.diffs.push_back(si / ni - so / no);
    for (int k = gap + band; k < depth; ++k) {
      float v;
      if (view.Get(frame.value, k, t, true, &v)) st.far.push_back(v);
    }
  }
  auto beyond = [&](double bright_level, double texture_level) {
    BeyondCounts c;
    for (int t = 0; t < view.along_size(); ++t) {
      for (int k = gap; k < depth; ++k) {
        float v, g = 0.0f;
        if (!view.Get(frame.value, k, t, true, &v)) continue;
        view.Get(frame.grad, k, t, true, &g);
        ++c.n;
        c.bright += v > bright_level ? 1 : 0;
        c.textured += (k > gap && g > texture_level) ? 1 : 0;
      }
    }
    for (int t = 0; t < view.along_size(); t += 2) {
      for (int k = gap; k < view.across_size(); k += 2) {
        float v;
        if (!view.Get(frame.value, k, t, true, &v)) continue;
        ++c.nf;
        c.bf += v > bright_level ? 1 : 0;
      }
    }
    return c;
  };
  return JudgeSide(st, beyond, position, range, depth_px, bounded);
}

}  // namespace beamtrim::field_internal
