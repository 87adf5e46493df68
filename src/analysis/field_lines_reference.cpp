// The slow, obvious side kernels (field_lines_reference.h): the fast ones in field_lines.cpp
// must agree with these exactly.
#include "analysis/field_lines_reference.h"

#include <algorithm>
#include <cmath>

namespace beamtrim::field_internal {

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
