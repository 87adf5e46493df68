// Slow, obvious versions of the side kernels of field_lines.cpp: every pixel is reached through
// SideView, one bounds and validity check at a time, exactly as the method reads (docs/method.md,
// "Field detection"). The fast kernels must give identical results; tests compare the two.
// Stateless; safe to call from several threads. Not part of the public API.
#pragma once

#include <functional>
#include <vector>

#include "analysis/field_internal.h"

namespace beamtrim::field_internal {

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
      if (Get(f.value, k, t, true, &v)) {
        s.out_sum += v;
        ++s.out_n;
      }
      if (Get(f.value, k, t, false, &v)) {
        s.in_sum += v;
        ++s.in_n;
      }
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

// What EvaluateSide gathers near one boundary, fast or slow; JudgeSide turns it into evidence.
struct StripStats {
  std::vector<double> outs, ins, diffs;  // per along-edge position with both strips
  std::vector<float> far;                // outside values from the strip to the side's depth
};
// Counts over the outside at the thresholds JudgeSide derives from the strips: `n` pixels in
// the outside strip to the depth, `bright` above the bright level, `textured` with gradient
// above the texture level; `nf` and `bf` the same over the half-plane, every other pixel.
struct BeyondCounts {
  int n = 0, bright = 0, textured = 0, nf = 0, bf = 0;
};
// The decision part of EvaluateSide, shared by the fast kernel and the reference. `beyond`
// is called once (when the side gets that far) with the bright and texture levels.
SideEvidence JudgeSide(StripStats& stats, const std::function<BeyondCounts(double, double)>& beyond,
                       int position, double range, double depth_px, bool bounded);

// The value std::nth_element(v.begin(), v.begin() + k, v.end()) leaves at v[k] (k < size),
// bit for bit, found by a radix selection on the floats' bits for larger inputs (v is then
// left as it was); the median of JudgeSide. Tests compare it with std::nth_element.
float NthFloat(std::vector<float>& v, size_t k);

// Exact replacements of library calls in CandidateAngles' voting loop: std::fmod(x, 90.0)
// for the arguments that loop produces, and std::lround. Tests compare them with the calls.
double FmodNinety(double x);
long RoundHalfAway(double x);

// As CandidateAngles (field_internal.h), with a fresh accumulator, cos and sin per vote, fmod
// and the scores' maxima taken one by one.
std::vector<double> CandidateAnglesReference(const WorkingImage& working, const cv::Mat1f& gx,
                                             const cv::Mat1f& gy, int count);
// As SideCandidates, StepSpan and EvaluateSide (field_internal.h), pixel by pixel.
std::vector<int> SideCandidatesReference(const Frame& frame, Side side, Span span, int count);
Span StepSpanReference(const Frame& frame, Side side, int position, Span span);
SideEvidence EvaluateSideReference(const Frame& frame, Side side, int position, Span span,
                                   double range, double depth_px, bool bounded = false);

}  // namespace beamtrim::field_internal
