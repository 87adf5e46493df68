// Candidate blade lines at working resolution: the field angle from a polarity-signed Hough
// accumulator, then, in a frame aligned with that angle, boundary positions per side and the
// evidence that a boundary is a blade shadow rather than an anatomy edge or an object.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <functional>
#include <limits>
#include <numeric>
#include <utility>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "analysis/field_internal.h"
#include "analysis/field_lines_reference.h"

namespace beamtrim::field_internal {
namespace {

constexpr double kDeg = M_PI / 180.0;

// A side's frame pixels as (along-edge index t, across index a) through element strides, so
// the kernels below walk raw rows for every side; SideView (field_lines_reference.h) is the
// slow, checked form of the same access.
struct Strided {
  const float* v;
  const float* g;
  const uchar* m;
  ptrdiff_t vt, va, gt, ga, mt, ma;
  int along, across;
  float Value(int t, int a) const { return v[t * vt + a * va]; }
  float Grad(int t, int a) const { return g[t * gt + a * ga]; }
  bool Valid(int t, int a) const { return m[t * mt + a * ma] != 0; }
};

Strided StridedFor(const Frame& f, Side side) {
  const bool vertical = side == Side::kLeft || side == Side::kRight;
  const ptrdiff_t vr = static_cast<ptrdiff_t>(f.value.step1());
  const ptrdiff_t gr = static_cast<ptrdiff_t>(f.grad.step1());
  const ptrdiff_t mr = static_cast<ptrdiff_t>(f.valid.step1());
  Strided s{f.value.ptr<float>(0), f.grad.empty() ? nullptr : f.grad.ptr<float>(0),
            f.valid.ptr<uchar>(0), 0, 0, 0, 0, 0, 0, 0, 0};
  if (vertical) {
    s.vt = vr, s.va = 1, s.gt = gr, s.ga = 1, s.mt = mr, s.ma = 1;
    s.along = f.value.rows, s.across = f.value.cols;
  } else {
    s.vt = 1, s.va = vr, s.gt = 1, s.ga = gr, s.mt = 1, s.ma = mr;
    s.along = f.value.cols, s.across = f.value.rows;
  }
  return s;
}

// The across index of the k-th pixel from a boundary in one direction: a = base + sign * k,
// as SideView::Across; Ks clamps a depth range [k0, k1) to the pixels inside the frame.
struct Direction {
  int base;
  int sign;
  int Across(int k) const { return base + sign * k; }
  std::pair<int, int> Ks(int k0, int k1, int across) const {
    // sign -1: 0 <= base - k < across  <=>  base - across < k <= base.
    const int lo = sign < 0 ? base - across + 1 : -base;
    const int hi = sign < 0 ? base + 1 : across - base;
    return {std::max(k0, lo), std::min(k1, hi)};
  }
};

// The largest float not above x: for every float v, v > x exactly when v > FloatAtOrBelow(x),
// so the counts below compare floats with floats (which vectorises) and count the same pixels
// as a comparison of the float value promoted to double would.
float FloatAtOrBelow(double x) {
  float f = static_cast<float>(x);
  if (static_cast<double>(f) > x) f = std::nextafter(f, -std::numeric_limits<float>::infinity());
  return f;
}

// Counts of the valid pixels of a side's outside, as the reference's `beyond` (field_lines_
// reference.cpp): near the edge (depths [k0, k1), every along index), `n` valid, `bright` above
// the bright level, `textured` with gradient above the texture level except at depth `gap`;
// over the half-plane (depths h0, h0 + 2, ... < h1, along indices 0, 2, ...), `nf` and `bf`.
// Counts are order-free, so each loop walks a raw row contiguously and branch-free.
BeyondCounts CountBeyond(const Strided& px, Direction d, int gap, int k0, int k1, int h0, int h1,
                         double bright_level, double texture_level) {
  const float bright = FloatAtOrBelow(bright_level);
  const float texture = FloatAtOrBelow(texture_level);
  BeyondCounts c;
  int n = 0, nb = 0, nt = 0, nf = 0, bf = 0;
  // Count of valid pixels (and of those above the levels) in row pointers v, g, m over
  // [lo, hi) with unit or double stride.
  auto near_run = [&](const float* v, const float* g, const uchar* m, int lo, int hi) {
    for (int i = lo; i < hi; ++i) {
      const int ok = m[i] != 0;
      n += ok;
      nb += ok & (v[i] > bright);
      nt += ok & (g[i] > texture);
    }
  };
  auto far_run = [&](const float* v, const uchar* m, int lo, int hi) {
    for (int i = lo; i < hi; i += 2) {
      const int ok = m[i] != 0;
      nf += ok;
      bf += ok & (v[i] > bright);
    }
  };
  const bool gap_in = k0 == gap && k1 > k0;  // the depth-gap pixels count for n and bright only
  if (px.va == 1) {  // t runs down the rows, the depth along each row
    if (k1 > k0) {
      const int a_lo = std::min(d.Across(k0), d.Across(k1 - 1));
      const int a_hi = std::max(d.Across(k0), d.Across(k1 - 1)) + 1;
      const int a_gap = d.Across(gap);
      for (int t = 0; t < px.along; ++t) {
        const float* v = px.v + t * px.vt;
        const float* g = px.g + t * px.gt;
        const uchar* m = px.m + t * px.mt;
        near_run(v, g, m, a_lo, a_hi);
        if (gap_in) nt -= (m[a_gap] != 0) & (g[a_gap] > texture);
      }
    }
    if (h1 > h0) {
      const int last = h0 + ((h1 - 1 - h0) / 2) * 2;
      const int a_lo = std::min(d.Across(h0), d.Across(last));
      const int a_hi = std::max(d.Across(h0), d.Across(last)) + 1;
      for (int t = 0; t < px.along; t += 2) {
        far_run(px.v + t * px.vt, px.m + t * px.mt, a_lo, a_hi);
      }
    }
  } else {  // the depth runs down the rows, t along each row
    for (int k = k0; k < k1; ++k) {
      const int a = d.Across(k);
      const float* v = px.v + a * px.va;
      const float* g = px.g + a * px.ga;
      const uchar* m = px.m + a * px.ma;
      if (k == gap) {
        const int keep = nt;
        near_run(v, g, m, 0, px.along);
        nt = keep;
      } else {
        near_run(v, g, m, 0, px.along);
      }
    }
    for (int k = h0; k < h1; k += 2) {
      const int a = d.Across(k);
      far_run(px.v + a * px.va, px.m + a * px.ma, 0, px.along);
    }
  }
  c.n = n;
  c.bright = nb;
  c.textured = nt;
  c.nf = nf;
  c.bf = bf;
  return c;
}

}  // namespace

// fmod(x, 90.0) for 270 <= x < 540 (x = psi - a + 405 with psi, a within a rounding error of
// [-45, 45)): fmod is exact, and so is each subtraction of 90 here (x and every difference
// are multiples of x's ulp and fit in the mantissa), so the result is the same double;
// anything else (NaN) goes to fmod itself.
double FmodNinety(double x) {
  double r = x - 270.0;
  while (r >= 90.0) r -= 90.0;
  if (!(x >= 270.0 && x < 540.0 && r >= 0.0)) return std::fmod(x, 90.0);
  return r;
}

// std::lround(x) without the library call: the integer part by truncation, then the exact
// remainder x - trunc(x) decides, half away from zero, as lround does; beyond 2^52 (where
// every double is an integer) and for NaN, lround itself.
long RoundHalfAway(double x) {
  if (!(std::fabs(x) < 4503599627370496.0)) return std::lround(x);
  long t = static_cast<long>(x);
  const double frac = x - static_cast<double>(t);
  if (frac >= 0.5) ++t;
  else if (frac <= -0.5) --t;
  return t;
}

namespace {

// Largest sum of three neighbouring accumulator cells a[o-1] + a[o] + a[o+1], 0 < o < n - 1,
// or 0 when there is none larger. The cells hold sums of positive votes (no NaN, no -0), so
// the maximum of the float sums converted once equals the maximum of the converted sums taken
// one by one; four running maxima let the loop run without a chain of dependent comparisons.
float LargestTripleSum(const float* a, int n) {
  float m0 = 0.0f, m1 = 0.0f, m2 = 0.0f, m3 = 0.0f;
  int o = 1;
  for (; o + 4 < n; o += 4) {
    const float s0 = a[o - 1] + a[o] + a[o + 1];
    const float s1 = a[o] + a[o + 1] + a[o + 2];
    const float s2 = a[o + 1] + a[o + 2] + a[o + 3];
    const float s3 = a[o + 2] + a[o + 3] + a[o + 4];
    m0 = s0 > m0 ? s0 : m0;
    m1 = s1 > m1 ? s1 : m1;
    m2 = s2 > m2 ? s2 : m2;
    m3 = s3 > m3 ? s3 : m3;
  }
  for (; o + 1 < n; ++o) {
    const float s0 = a[o - 1] + a[o] + a[o + 1];
    m0 = s0 > m0 ? s0 : m0;
  }
  return std::max(std::max(m0, m1), std::max(m2, m3));
}

Direction Outward(Side side, int p) {
  const bool low_is_outside = side == Side::kLeft || side == Side::kTop;
  return low_is_outside ? Direction{p - 1, -1} : Direction{p, 1};
}
Direction Inward(Side side, int p) {
  const bool low_is_outside = side == Side::kLeft || side == Side::kTop;
  return low_is_outside ? Direction{p, 1} : Direction{p - 1, -1};
}

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
  // acc[(angle * 4 + family_sign) * offsets + offset]. About 2 MB: kept per thread and
  // cleared for each image, because a fresh allocation of that size is mapped anew every time
  // and faulting its pages in cost more than the voting itself.
  thread_local std::vector<float> acc;
  acc.assign(static_cast<size_t>(kAngles) * 4 * offsets, 0.0f);
  // The same cos and sin expressions as per vote, evaluated once per bin.
  std::vector<double> cos_bin(kAngles), sin_bin(kAngles);
  for (int bin = 0; bin < kAngles; ++bin) {
    const double a = -45.0 + bin * kBin;
    cos_bin[bin] = std::cos(a * kDeg);
    sin_bin[bin] = std::sin(a * kDeg);
  }
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
        double d = FmodNinety(psi - a + 405.0) - 45.0;  // circular distance mod 90
        if (std::fabs(d) > kTol) continue;
        const int q = static_cast<int>(RoundHalfAway((phi - a) / 90.0));
        const int fam_sign = ((q % 4) + 4) % 4;  // 0: +n1, 1: +n2, 2: -n1, 3: -n2
        const double ca = cos_bin[bin], sa = sin_bin[bin];
        const double px = x + 0.5, py = y + 0.5;
        const double off = (fam_sign % 2 == 0) ? px * ca + py * sa : -px * sa + py * ca;
        const int o = std::clamp(static_cast<int>(RoundHalfAway(off)) + diag, 0, offsets - 1);
        acc[(static_cast<size_t>(bin) * 4 + fam_sign) * offsets + o] += m;
      }
    }
  }
  std::vector<double> score(kAngles, 0.0);
  for (int bin = 0; bin < kAngles; ++bin) {
    for (int fs = 0; fs < 4; ++fs) {
      const float* a = &acc[(static_cast<size_t>(bin) * 4 + fs) * offsets];
      score[bin] += static_cast<double>(LargestTripleSum(a, offsets));
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

float NthFloat(std::vector<float>& v, size_t k) {
  const size_t n = v.size();
  // Small inputs, and the cases below where the order of equal values could matter, go to
  // std::nth_element on the vector as given, which is then exactly the reference.
  auto reference = [&] {
    std::nth_element(v.begin(), v.begin() + k, v.end());
    return v[k];
  };
  if (n < 256) return reference();
  // Order-preserving keys: the unsigned order of the keys is the order of the floats, except
  // that it puts -0 before +0 (equal as floats) and sorts NaN, which floats do not order.
  thread_local std::vector<uint32_t> keys;
  keys.resize(n);
  uint32_t nan = 0;
  for (size_t i = 0; i < n; ++i) {
    uint32_t u;
    std::memcpy(&u, &v[i], sizeof u);
    nan |= static_cast<uint32_t>((u & 0x7fffffffu) > 0x7f800000u);
    keys[i] = u ^ (static_cast<uint32_t>(-static_cast<int32_t>(u >> 31)) | 0x80000000u);
  }
  if (nan) return reference();
  // Most significant byte first: count the digits of the remaining keys, keep those in the
  // bucket holding rank k (a plateau of similar values shares its first byte, so the first
  // pass keeps them all without copying).
  uint32_t* cur = keys.data();
  size_t m = n, rank = k;
  uint32_t key = 0;
  for (int shift = 24; shift >= 0; shift -= 8) {
    uint32_t count[256] = {};
    for (size_t i = 0; i < m; ++i) ++count[(cur[i] >> shift) & 0xffu];
    uint32_t digit = 0;
    for (;; ++digit) {
      if (rank < count[digit]) break;
      rank -= count[digit];
    }
    key |= digit << shift;
    if (count[digit] != m) {
      size_t w = 0;
      for (size_t i = 0; i < m; ++i) {
        if (((cur[i] >> shift) & 0xffu) == digit) cur[w++] = cur[i];
      }
      m = w;
    }
  }
  const uint32_t u = (key & 0x80000000u) ? key ^ 0x80000000u : ~key;
  float out;
  std::memcpy(&out, &u, sizeof out);
  // A zero may be +0 or -0 in the input; which one std::nth_element leaves at k depends on
  // its way of partitioning, so the reference decides. Every other value that compares equal
  // to the k-th has the same bits.
  if (out == 0.0f) return reference();
  return out;
}

std::vector<int> StrongestBoundaries(const std::vector<double>& e, int count) {
  const int n = static_cast<int>(e.size()) - 1;
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

std::vector<int> SideCandidates(const Frame& frame, Side side, Span span, int count) {
  const Strided px = StridedFor(frame, side);
  const int n = px.across;
  const bool low_is_outside = side == Side::kLeft || side == Side::kTop;
  // e[p]: sum over the span of (inside - outside) across boundary p, both pixels valid; each
  // e[p] adds its terms in along-edge order, as the reference does. A pair that is not valid
  // adds +0.0, which leaves the sum as it was (it starts at +0.0 and, rounding to nearest,
  // never becomes -0.0), so the loops run branch-free.
  std::vector<double> e(n + 1, 0.0);
  const int t0 = std::max(0, span.lo), t1 = std::min(span.hi, px.along);
  if (px.va == 1) {  // boundaries along each row: one row adds one term to every e[p]
    double* ep = e.data();
    for (int t = t0; t < t1; ++t) {
      const float* v = px.v + t * px.vt;
      const uchar* m = px.m + t * px.mt;
      if (low_is_outside) {
        for (int p = 1; p < n; ++p) {
          const float d = v[p] - v[p - 1];
          ep[p] += (m[p] != 0) & (m[p - 1] != 0) ? static_cast<double>(d) : 0.0;
        }
      } else {
        for (int p = 1; p < n; ++p) {
          const float d = v[p - 1] - v[p];
          ep[p] += (m[p] != 0) & (m[p - 1] != 0) ? static_cast<double>(d) : 0.0;
        }
      }
    }
  } else {  // boundaries between rows: e[p] sums along the row pair, four rows at a time
    auto term = [&](int p, int t) {
      const float* v = px.v + p * px.va;
      const uchar* m = px.m + p * px.ma;
      const float* w = v - px.va;
      const uchar* mw = m - px.ma;
      const float d = low_is_outside ? v[t] - w[t] : w[t] - v[t];
      return (m[t] != 0) & (mw[t] != 0) ? static_cast<double>(d) : 0.0;
    };
    int p = 1;
    for (; p + 3 < n; p += 4) {
      double s0 = 0.0, s1 = 0.0, s2 = 0.0, s3 = 0.0;
      for (int t = t0; t < t1; ++t) {
        s0 += term(p, t);
        s1 += term(p + 1, t);
        s2 += term(p + 2, t);
        s3 += term(p + 3, t);
      }
      e[p] = s0, e[p + 1] = s1, e[p + 2] = s2, e[p + 3] = s3;
    }
    for (; p < n; ++p) {
      double s0 = 0.0;
      for (int t = t0; t < t1; ++t) s0 += term(p, t);
      e[p] = s0;
    }
  }
  return StrongestBoundaries(e, count);
}

namespace {

// The last stage of StepSpan: the longest run of steps `d` (indices from `lo`) at least half
// the 90th percentile of `present` (reordered), gaps of up to 3 pixels bridged; `span` when
// there is none.
Span LongestStepRun(const std::vector<double>& d, std::vector<double>& present, int lo,
                    Span span) {
  if (present.size() < 3) return span;
  // The 90th percentile of the steps: only compared below, so which of two equal values (+0
  // and -0) the selection returns does not matter.
  const size_t k = (present.size() * 9) / 10;
  std::nth_element(present.begin(), present.begin() + k, present.end());
  const double strong = present[k];
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

// Sums and counts of the valid pixels of the outside strip (depths [o.first, o.second)) and
// the inside strip at along-edge index t, each summed in the order of increasing depth.
struct StripSums {
  double out = 0.0, in = 0.0;
  int n_out = 0, n_in = 0;
};
StripSums SumStrips(const Strided& px, Direction out, std::pair<int, int> o, Direction in,
                    std::pair<int, int> i, int t) {
  StripSums s;
  for (int k = o.first; k < o.second; ++k) {
    const int a = out.Across(k);
    if (px.Valid(t, a)) { s.out += px.Value(t, a); ++s.n_out; }
  }
  for (int k = i.first; k < i.second; ++k) {
    const int a = in.Across(k);
    if (px.Valid(t, a)) { s.in += px.Value(t, a); ++s.n_in; }
  }
  return s;
}

}  // namespace

Span StepSpan(const Frame& frame, Side side, int position, Span span) {
  const Strided px = StridedFor(frame, side);
  const Direction out = Outward(side, position), in = Inward(side, position);
  const int gap = 2, band = 4;
  const auto [ob0, ob1] = out.Ks(gap, gap + band, px.across);
  const auto [ib0, ib1] = in.Ks(gap, gap + band, px.across);
  const int lo = std::max(0, span.lo), hi = std::min(span.hi, px.along);
  std::vector<double> d(std::max(0, hi - lo), 0.0);
  std::vector<double> present;
  present.reserve(d.size());
  for (int t = lo; t < hi; ++t) {
    // The strip sums of SideView::SumStrips, each in the order of increasing depth.
    const StripSums ss = SumStrips(px, out, {ob0, ob1}, in, {ib0, ib1}, t);
    if (ss.n_out == 0 || ss.n_in == 0) continue;
    d[t - lo] = ss.in / ss.n_in - ss.out / ss.n_out;
    present.push_back(d[t - lo]);
  }
  return LongestStepRun(d, present, lo, span);
}

SideEvidence EvaluateSide(const Frame& frame, Side side, int position, Span span, double range,
                          double depth_px, bool bounded) {
  const Strided px = StridedFor(frame, side);
  const Direction out = Outward(side, position), in = Inward(side, position);
  const int gap = 2;  // skips the penumbra and the working-resolution blur
  const int band = 4;
  const int depth = std::max(gap + band + 1, static_cast<int>(std::lround(depth_px)));
  const auto [ob0, ob1] = out.Ks(gap, gap + band, px.across);
  const auto [ib0, ib1] = in.Ks(gap, gap + band, px.across);
  const auto [of0, of1] = out.Ks(gap + band, depth, px.across);
  StripStats st;
  const int t0 = std::max(0, span.lo), t1 = std::min(span.hi, px.along);
  st.outs.reserve(std::max(0, t1 - t0));
  st.ins.reserve(std::max(0, t1 - t0));
  st.diffs.reserve(std::max(0, t1 - t0));
  st.far.reserve(static_cast<size_t>(std::max(0, t1 - t0)) * std::max(0, of1 - of0));
  for (int t = t0; t < t1; ++t) {
    const StripSums ss = SumStrips(px, out, {ob0, ob1}, in, {ib0, ib1}, t);
    double so = ss.out;
    const double si = ss.in;
    int no = ss.n_out;
    const int ni = ss.n_in;
    // A blade shadow within a few millimetres of the image border: the strip just outside
    // the edge is all there is of the blocked plateau.
    for (int k = gap - 1; no == 0 && k >= 1; --k) {
      const int a = out.Across(k);
      if (a >= 0 && a < px.across && px.Valid(t, a)) { so += px.Value(t, a); ++no; }
    }
    // Next to the image border the outside strip may be narrower than the band.
    if (no == 0 || ni < band / 2) continue;
    st.outs.push_back(so / no);
    st.ins.push_back(si / ni);
    st.diffs.push_back(si / ni - so / no);
    for (int k = of0; k < of1; ++k) {
      const int a = out.Across(k);
      if (px.Valid(t, a)) st.far.push_back(px.Value(t, a));
    }
  }
  auto beyond = [&](double bright_level, double texture_level) {
    const auto [k0, k1] = out.Ks(gap, depth, px.across);
    // Every other pixel from `gap` on: the first k of that parity inside the frame.
    auto [h0, h1] = out.Ks(gap, px.across, px.across);
    if ((h0 - gap) % 2 != 0) ++h0;
    return CountBeyond(px, out, gap, k0, k1, h0, h1, bright_level, texture_level);
  };
  return JudgeSide(st, beyond, position, range, depth_px, bounded);
}

SideEvidence JudgeSide(StripStats& st, const std::function<BeyondCounts(double, double)>& beyond,
                       int position, double range, double depth_px, bool bounded) {
  // A blade edge runs at least a centimetre or so: shorter straight steps are objects. Between
  // known perpendicular blades (bounded) the whole span is the edge, however short the field.
  SideEvidence ev;
  ev.position = position;
  const std::vector<double>& outs = st.outs;
  const std::vector<double>& ins = st.ins;
  const std::vector<double>& diffs = st.diffs;
  int min_length_px = std::max(3, static_cast<int>(std::lround(depth_px / 4.0)));
  if (bounded) {
    min_length_px = std::max(3, std::min(min_length_px, static_cast<int>(diffs.size() * 3 / 4)));
  }
  if (diffs.size() < 3) {
    ev.why_not = "edge too short";
    return ev;
  }
  ev.outside = MedianOf(outs);
  // The open level: upper quartile of the inside strip, because part of the edge may run
  // under the perpendicular blades (dark on both sides) and must not dilute it.
  std::vector<double> tmp = ins;
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
  const double far_level =
      st.far.empty() ? ev.outside : static_cast<double>(NthFloat(st.far, st.far.size() / 2));
  ev.flatness = (ev.outside - far_level) / ev.step;
  // The blade blocks its whole half-plane: the outside strip is tested over the full length,
  // and the whole half-plane to the image border (every other pixel), where brightness far
  // beyond means either a second exposure or no blade at all.
  const BeyondCounts c = beyond(ev.outside + 0.5 * ev.step, 0.15 * ev.step);
  ev.bright = c.n ? static_cast<double>(c.bright) / c.n : 0.0;
  ev.bright_far = c.nf ? static_cast<double>(c.bf) / c.nf : 0.0;
  ev.texture = c.n ? static_cast<double>(c.textured) / c.n : 0.0;
  const double rel = ev.step / std::max(1e-9, range);
  // Support counts most: a line at a slightly wrong angle still has a partial step, and only
  // a steep penalty lets the true angle win.
  const double sup2 = ev.support * ev.support;
  ev.score = rel * sup2 * sup2 * ev.coverage * ev.coverage * (1.0 - ev.bright) * (1.0 - ev.texture) *
             (1.0 - std::clamp(ev.flatness, 0.0, 1.0));
  const bool step_ok = rel >= kMinRelativeStep && ev.support >= 0.6 && (!bounded || ev.coverage >= 0.5);
  const bool bright = ev.bright > kMaxBrightShare;
  const bool textured = ev.texture > kMaxTexturedShare;
  const bool falling = ev.flatness > kMaxFallOff;
  if (rel < kMinRelativeStep) ev.why_not = "contrast too low";
  else if (ev.support < 0.6) ev.why_not = "step along less than 60 % of the edge";
  else if (bounded && ev.coverage < 0.5) ev.why_not = "step along less than half of the field side";
  else if (bright) ev.why_not = "bright structures beyond the edge";
  else if (textured) ev.why_not = "structured (anatomy) beyond the edge";
  else if (falling) ev.why_not = "no flat blocked plateau beyond the edge";
  ev.blade = ev.why_not.empty();
  ev.only_bright = step_ok && bright && !textured && !falling;
  return ev;
}

}  // namespace beamtrim::field_internal
