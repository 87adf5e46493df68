// Rectangle hypotheses: at one field angle, each side is either a blade line from its
// candidates or "beyond the image"; the four choices are made by coordinate ascent, each side
// tested over the span left open by the perpendicular pair.
#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <utility>
#include <vector>

#include "analysis/field_internal.h"

namespace beamtrim::field_internal {
namespace {

constexpr double kDeg = M_PI / 180.0;

bool Vertical(Side s) { return s == Side::kLeft || s == Side::kRight; }

Side Opposite(Side s) {
  switch (s) {
    case Side::kLeft: return Side::kRight;
    case Side::kRight: return Side::kLeft;
    case Side::kTop: return Side::kBottom;
    case Side::kBottom: return Side::kTop;
  }
  return s;
}

// Along-edge span of a side: between the perpendicular blades found so far.
// Stays clear of the perpendicular penumbrae by up to 3 working pixels, less on a field only a
// few pixels across, which would otherwise be left with no span at all.
Span SpanFor(const Rectangle& r, Side s, const Frame& f) {
  Span span{0, Vertical(s) ? f.value.rows : f.value.cols};
  const auto& lo = r.sides[static_cast<int>(Vertical(s) ? Side::kTop : Side::kLeft)];
  const auto& hi = r.sides[static_cast<int>(Vertical(s) ? Side::kBottom : Side::kRight)];
  if (lo) span.lo = static_cast<int>(lo->position);
  if (hi) span.hi = static_cast<int>(hi->position);
  const int gap = std::clamp((span.hi - span.lo) / 4, 0, 3);
  if (lo) span.lo += gap;
  if (hi) span.hi -= gap;
  if (span.hi <= span.lo) span = {span.lo - gap, span.hi + gap};
  return span;
}

// Corner corroboration (CornerCorroborated), working pixels: a perpendicular step ends on a
// side within kCornerTolerancePx and may run on past it by at most kCornerRunOnPx.
constexpr int kCornerTolerancePx = 2;
constexpr int kCornerRunOnPx = 6;

// The opposite side must leave a field of at least a few working pixels.
bool Compatible(const Rectangle& r, Side s, double position) {
  const auto& other = r.sides[static_cast<int>(Opposite(s))];
  if (!other) return true;
  const double min_size = 4.0;
  const bool low = s == Side::kLeft || s == Side::kTop;
  return low ? position + min_size <= other->position : other->position + min_size <= position;
}

// EvaluateSide, SideCandidates and StepSpan are pure functions of the frame and their
// arguments. The coordinate ascent asks many of the same questions again (later passes whose
// spans did not change, MeasureWithinNeighbours, the final check), so the answers are kept for
// the one frame a BestRectangle call works on; results are the same as calling the kernels.
class FrameQueries {
 public:
  FrameQueries(const Frame& frame, double range, double depth_px)
      : frame_(frame), range_(range), depth_px_(depth_px) {}

  SideEvidence Evaluate(Side s, int position, Span span, bool bounded) {
    const std::array<int, 5> key{static_cast<int>(s), position, span.lo, span.hi, bounded ? 1 : 0};
    auto it = evidence_.find(key);
    if (it == evidence_.end()) {
      it = evidence_.emplace(key, EvaluateSide(frame_, s, position, span, range_, depth_px_, bounded)).first;
    }
    return it->second;
  }
  const std::vector<int>& Candidates(Side s, Span span, int count) {
    const std::array<int, 4> key{static_cast<int>(s), span.lo, span.hi, count};
    auto it = candidates_.find(key);
    if (it == candidates_.end()) it = candidates_.emplace(key, SideCandidates(frame_, s, span, count)).first;
    return it->second;
  }
  Span StepSpanAt(Side s, int position, Span span) {
    const std::array<int, 4> key{static_cast<int>(s), position, span.lo, span.hi};
    auto it = step_spans_.find(key);
    if (it == step_spans_.end()) it = step_spans_.emplace(key, StepSpan(frame_, s, position, span)).first;
    return it->second;
  }
  const Frame& frame() const { return frame_; }

 private:
  const Frame& frame_;
  double range_;
  double depth_px_;
  std::map<std::array<int, 5>, SideEvidence> evidence_;
  std::map<std::array<int, 4>, std::vector<int>> candidates_;
  std::map<std::array<int, 4>, Span> step_spans_;
};

// The sides chosen early in a pass were measured before their perpendicular neighbours were
// known, so their levels include the corners, where two blades overlap; the consistency test
// must compare every side over the span its neighbours leave. A side that is no blade over
// that span (too short, for a tiny field) keeps its first evidence with the levels measured
// there: the bounded tests decide on it later.
void MeasureWithinNeighbours(FrameQueries& q, Rectangle& r) {
  std::array<std::optional<SideEvidence>, 4> measured = r.sides;
  for (Side s : kAllSides) {
    auto& slot = measured[static_cast<int>(s)];
    if (!slot) continue;
    SideEvidence ev = q.Evaluate(s, static_cast<int>(slot->position), SpanFor(r, s, q.frame()), false);
    if (ev.blade) {
      slot = ev;
    } else if (ev.step > 0.0) {
      slot->outside = ev.outside;
      slot->inside = ev.inside;
    }
  }
  r.sides = measured;
}

// The blade beyond a small field over dense anatomy may shadow open air beside the patient,
// whose leakage and off-focus glow can be brighter than half-way up the step: the bright-
// beyond test then rejects a true blade. A step that closes the rectangle where the
// perpendicular blades' own steps end is kept all the same: anatomy does not end two straight
// edges on a third one at right angles. Both perpendicular steps must reach the side and at
// least one must end on it: beyond a small field the other one may run on for a few
// millimetres along a bright outline just past the corner (an edge-enhancement halo around a
// skull or a knee), which no anatomy edge explains either.
bool CornerCorroborated(FrameQueries& q, const Rectangle& r, Side s, int position) {
  const bool vertical = Vertical(s);
  const Side lo_side = vertical ? Side::kTop : Side::kLeft;
  const Side hi_side = vertical ? Side::kBottom : Side::kRight;
  const int along = vertical ? q.frame().value.cols : q.frame().value.rows;
  const bool low = s == Side::kLeft || s == Side::kTop;
  int ending = 0;
  for (Side perp : {lo_side, hi_side}) {
    const auto& ev = r.sides[static_cast<int>(perp)];
    if (!ev) return false;
    const Span run = q.StepSpanAt(perp, static_cast<int>(ev->position), Span{0, along});
    const int end = low ? run.lo : run.hi;
    const int past = low ? position - end : end - position;  // how far the run goes beyond
    if (past < -kCornerTolerancePx || past > kCornerRunOnPx) return false;
    if (std::abs(past) <= kCornerTolerancePx) ++ending;
  }
  return ending >= 1;
}

// `provisional`: keep it now and let the end of the search decide (when the neighbours that
// would corroborate it are themselves only bright-beyond sides).
void LiftCorroborated(FrameQueries& q, const Rectangle& r, Side s, int position, bool provisional,
                      SideEvidence* ev) {
  if (ev->blade || !ev->only_bright) return;
  if (!provisional && !CornerCorroborated(q, r, s, position)) return;
  ev->blade = true;
  ev->lifted = true;
  ev->why_not.clear();
}

}  // namespace

void DropInconsistent(Rectangle& r, double lo, double range) {
  const SideEvidence* ref = nullptr;
  double darkest = std::numeric_limits<double>::infinity();
  for (const auto& s : r.sides) {
    if (s && (!ref || s->score > ref->score)) ref = &*s;
    if (s) darkest = std::min(darkest, s->outside);
  }
  if (!ref) return;
  const double floor = darkest + 0.25 * (ref->inside - darkest);
  for (auto& s : r.sides) {
    if (!s) continue;
    // Half-way to the higher of the two open levels: the open level differs from side to side
    // (heel effect, dense anatomy along one edge), and a plateau beside the bright part of the
    // field is lifted by its scatter and glow with it.
    const double open = std::max(ref->inside, s->inside);
    const double limit = darkest + 0.5 * (open - darkest);
    const bool anatomy_outline = AnatomyOutlinePlateau(s->outside, s->step, lo, range);
    if (s->outside > limit || s->inside < floor || anatomy_outline) s.reset();
  }
}

namespace {

// Coordinate ascent over the sides' candidates, then the checks of the whole rectangle.
Rectangle SearchRectangle(FrameQueries& q, double lo, double range, bool provisional) {
  const Frame& frame = q.frame();
  Rectangle r;
  r.angle_deg = frame.angle_deg;
  for (int pass = 0; pass < 4; ++pass) {
    bool changed = false;
    for (Side s : kAllSides) {
      const Span span = SpanFor(r, s, frame);
      const bool bounded = pass > 0;
      std::optional<SideEvidence> best;
      for (int p : q.Candidates(s, span, 6)) {
        if (!Compatible(r, s, p)) continue;
        const Span tested = bounded ? span : q.StepSpanAt(s, p, span);
        SideEvidence ev = q.Evaluate(s, p, tested, bounded);
        LiftCorroborated(q, r, s, p, provisional, &ev);
        if (ev.blade && (!best || ev.score > best->score)) best = ev;
      }
      auto& slot = r.sides[static_cast<int>(s)];
      const bool differs = best.has_value() != slot.has_value() ||
                           (best && slot && best->position != slot->position);
      changed |= differs;
      slot = best;
    }
    MeasureWithinNeighbours(q, r);
    DropInconsistent(r, lo, range);
    if (!changed && pass > 0) break;
  }
  // Final check of every side over the span its neighbours leave.
  for (Side s : kAllSides) {
    auto& slot = r.sides[static_cast<int>(s)];
    if (!slot) continue;
    SideEvidence ev = q.Evaluate(s, static_cast<int>(slot->position), SpanFor(r, s, frame), true);
    LiftCorroborated(q, r, s, static_cast<int>(slot->position), provisional, &ev);
    if (ev.blade) slot = ev; else slot.reset();
  }
  DropInconsistent(r, lo, range);
  // Four blades whose steps all end on each other close the rectangle: the tests below are
  // for single edges that might be anatomy.
  bool closed = true;
  for (Side s : kAllSides) {
    const auto& slot = r.sides[static_cast<int>(s)];
    closed = closed && slot && CornerCorroborated(q, r, s, static_cast<int>(slot->position));
  }
  // A side with bright regions far beyond its dark strip is kept only when a side with a
  // clean half-plane shows the same blocked level (a second exposure beyond a real blade);
  // otherwise it is more likely an anatomy edge with tissue beyond.
  for (Side s : kAllSides) {
    auto& slot = r.sides[static_cast<int>(s)];
    if (!slot || slot->bright_far <= 0.1 || closed) continue;
    bool confirmed = false;
    for (const auto& other : r.sides) {
      if (other && other->bright_far <= 0.1 && slot->bright <= 0.02 &&
          std::fabs(other->outside - slot->outside) <= 0.3 * slot->step) {
        confirmed = true;
      }
    }
    if (!confirmed) slot.reset();
  }
  // A side kept only because the rectangle closed on it goes when its neighbours have gone.
  for (bool dropped = true; dropped;) {
    dropped = false;
    for (Side s : kAllSides) {
      auto& slot = r.sides[static_cast<int>(s)];
      if (slot && slot->lifted && !CornerCorroborated(q, r, s, static_cast<int>(slot->position))) {
        slot.reset();
        dropped = true;
      }
    }
  }
  r.score = 0.0;
  for (const auto& s : r.sides) r.score += s ? s->score : 0.0;
  return r;
}

}  // namespace

Rectangle BestRectangle(const Frame& frame, double lo, double range, double depth_px) {
  FrameQueries q(frame, range, depth_px);
  Rectangle r = SearchRectangle(q, lo, range, false);
  if (std::all_of(r.sides.begin(), r.sides.end(), [](const auto& s) { return s.has_value(); })) {
    return r;
  }
  // When several sides of a small field over dense anatomy look bright beyond, none can be
  // corroborated by the others in the first search; a second one keeps them provisionally
  // and is taken only if all four close on each other.
  Rectangle closed = SearchRectangle(q, lo, range, true);
  const bool four = std::all_of(closed.sides.begin(), closed.sides.end(),
                                [](const auto& s) { return s.has_value(); });
  return four ? closed : r;
}

namespace {

struct Band {
  int lo = 0, hi = 0;  // [lo, hi) in frame pixels across the band
};

// Whether frame column (vertical = true) or row c is at the blocked level almost everywhere
// inside [a_lo, a_hi) along it.
bool LineBlocked(const Frame& f, bool vertical, int c, int a_lo, int a_hi, double blocked_below) {
  int n = 0, dark = 0;
  for (int a = a_lo; a < a_hi; ++a) {
    const int row = vertical ? a : c, col = vertical ? c : a;
    if (row < 0 || col < 0 || row >= f.value.rows || col >= f.value.cols || !f.valid(row, col)) continue;
    ++n;
    dark += f.value(row, col) < blocked_below ? 1 : 0;
  }
  return n >= 3 && dark >= 0.9 * n;
}

// Runs of blocked columns or rows (LineBlocked) in [c_lo, c_hi), widest first (ties: the first
// found first).
std::vector<Band> BlockedBands(const Frame& f, bool vertical, int c_lo, int c_hi, int a_lo,
                               int a_hi, double blocked_below) {
  std::vector<Band> bands;
  int run = -1;
  for (int c = c_lo; c <= c_hi; ++c) {
    const bool blocked = c < c_hi && LineBlocked(f, vertical, c, a_lo, a_hi, blocked_below);
    if (blocked && run < 0) run = c;
    if (!blocked && run >= 0) {
      bands.push_back(Band{run, c});
      run = -1;
    }
  }
  std::stable_sort(bands.begin(), bands.end(),
                   [](const Band& x, const Band& y) { return x.hi - x.lo > y.hi - y.lo; });
  return bands;
}

// Width of a blocked band between the two fields' edges at their 50 % points (the edge
// definition): the band is widened while whole columns (vertical) or rows stay below `half`.
// The core that BlockedBands finds is narrower by a share of both penumbrae.
int GapWidthAtHalf(const Frame& f, bool vertical, Band band, int c_lo, int c_hi, int a_lo,
                   int a_hi, double half) {
  auto blocked_at = [&](int c) { return LineBlocked(f, vertical, c, a_lo, a_hi, half); };
  while (band.lo - 1 > c_lo + 2 && blocked_at(band.lo - 1)) --band.lo;
  while (band.hi < c_hi - 2 && blocked_at(band.hi)) ++band.hi;
  return band.hi - band.lo;
}

double BandMedian(const Frame& f, bool vertical, Band band, int a_lo, int a_hi) {
  std::vector<double> v;
  for (int c = band.lo; c < band.hi; ++c) {
    for (int a = a_lo; a < a_hi; ++a) {
      const int row = vertical ? a : c, col = vertical ? c : a;
      if (row < 0 || col < 0 || row >= f.value.rows || col >= f.value.cols || !f.valid(row, col)) continue;
      v.push_back(f.value(row, col));
    }
  }
  if (v.empty()) return std::numeric_limits<double>::infinity();
  std::nth_element(v.begin(), v.begin() + v.size() / 2, v.end());
  return v[v.size() / 2];
}

// Share of positions whose value lies within `tolerance` of the least-squares line through
// all (position, value) pairs.
double ShareOnFittedLine(const std::vector<std::pair<double, double>>& pts, double tolerance) {
  if (pts.size() < 3) return 0.0;
  double mx = 0.0, my = 0.0;
  for (const auto& [x, y] : pts) { mx += x; my += y; }
  mx /= pts.size();
  my /= pts.size();
  double sxx = 0.0, sxy = 0.0;
  for (const auto& [x, y] : pts) { sxx += (x - mx) * (x - mx); sxy += (x - mx) * (y - my); }
  const double slope = sxx > 0.0 ? sxy / sxx : 0.0;
  int on = 0;
  for (const auto& [x, y] : pts) on += std::fabs(y - (my + slope * (x - mx))) <= tolerance ? 1 : 0;
  return static_cast<double>(on) / pts.size();
}

// For the less straight of a band's two edges, the share of the along-edge positions where the
// dark run through the band ends on a straight line (within a couple of pixels). The gap
// between two exposures is bounded by blade shadows, straight along the whole field even when
// the two fields differ in angle; a dense organ or bone as dark as the blocked plateau has a
// curved outline, so its dark run ends off any one line.
double StraightEdgeShare(const Frame& f, bool vertical, Band band, int c_lo, int c_hi, int a_lo,
                         int a_hi, double blocked_below) {
  auto dark = [&](int c, int a) {
    const int row = vertical ? a : c, col = vertical ? c : a;
    if (row < 0 || col < 0 || row >= f.value.rows || col >= f.value.cols || !f.valid(row, col)) {
      return false;
    }
    return f.value(row, col) < blocked_below;
  };
  std::vector<std::pair<double, double>> low_ends, high_ends;
  const int mid = (band.lo + band.hi) / 2;
  for (int a = a_lo; a < a_hi; ++a) {
    if (!dark(mid, a)) continue;
    int lo = mid, hi = mid;
    while (lo - 1 >= c_lo && dark(lo - 1, a)) --lo;
    while (hi + 1 < c_hi && dark(hi + 1, a)) ++hi;
    low_ends.emplace_back(a, lo);
    high_ends.emplace_back(a, hi);
  }
  const double tolerance = 2.0;
  return std::min(ShareOnFittedLine(low_ends, tolerance), ShareOnFittedLine(high_ends, tolerance));
}

}  // namespace

bool SplitAtBlockedBand(const Frame& frame, double range, double depth_px, double min_band_px,
                        Rectangle* rect) {
  std::vector<double> outs, ins;
  for (const auto& s : rect->sides) {
    if (s) { outs.push_back(s->outside); ins.push_back(s->inside); }
  }
  if (outs.empty()) return false;
  std::sort(ins.begin(), ins.end());
  const double blocked = *std::max_element(outs.begin(), outs.end());
  const double open = ins[ins.size() / 2];
  std::sort(outs.begin(), outs.end());
  const double typical_outside = outs[outs.size() / 2];
  if (!(open > blocked)) return false;
  const double below = blocked + 0.3 * (open - blocked);
  auto pos = [&](Side s, int fallback) {
    const auto& e = rect->sides[static_cast<int>(s)];
    return e ? static_cast<int>(e->position) : fallback;
  };
  const int u_lo = pos(Side::kLeft, 0), u_hi = pos(Side::kRight, frame.value.cols);
  const int v_lo = pos(Side::kTop, 0), v_hi = pos(Side::kBottom, frame.value.rows);
  for (bool vertical : {true, false}) {
    const int c_lo = vertical ? u_lo : v_lo, c_hi = vertical ? u_hi : v_hi;
    const int a_lo = (vertical ? v_lo : u_lo) + 2, a_hi = (vertical ? v_hi : u_hi) - 2;
    // Every dark band in turn, widest first: a dense bone along the field can be wider than
    // the gap between two exposures and fail the tests below while the gap passes them.
    const double half = blocked + 0.5 * (open - blocked);
    for (const Band& band : BlockedBands(frame, vertical, c_lo + 2, c_hi - 2, a_lo, a_hi, below)) {
      if (GapWidthAtHalf(frame, vertical, band, c_lo, c_hi, a_lo, a_hi, half) < min_band_px) continue;
      const int first = band.lo - c_lo, second = c_hi - band.hi;
      if (std::min(first, second) < 0.15 * (c_hi - c_lo)) continue;
      // Keep the larger part; its new side lies at the band.
      const bool keep_first = first >= second;
      const Side cut = vertical ? (keep_first ? Side::kRight : Side::kLeft)
                                : (keep_first ? Side::kBottom : Side::kTop);
      const int position = keep_first ? band.lo : band.hi;
      Span span{a_lo - 2, a_hi + 2};
      SideEvidence ev = EvaluateSide(frame, cut, position, span, range, depth_px, true);
      if (!(ev.step > 0.0) || ev.support < 0.6) continue;
      // Between two exposures lies the same blocked plateau as beyond the blades, bounded by
      // blade steps as strong as theirs; a spine, a long bone or a shield along the field is
      // brighter than that plateau or bounded by weaker steps.
      if (ev.step < 0.6 * (open - typical_outside)) continue;
      if (BandMedian(frame, vertical, band, a_lo, a_hi) >
          typical_outside + 0.25 * (open - typical_outside)) {
        continue;
      }
      if (StraightEdgeShare(frame, vertical, band, c_lo, c_hi, a_lo, a_hi, below) < 0.7) continue;
      ev.blade = true;  // the half-plane beyond holds the other exposure, by construction
      ev.why_not.clear();
      rect->sides[static_cast<int>(cut)] = ev;
      rect->split = true;
      return true;
    }
  }
  return false;
}

Line FrameSideLine(const Frame& frame, Side side, double position, int factor) {
  const double c = std::cos(frame.angle_deg * kDeg), s = std::sin(frame.angle_deg * kDeg);
  const double u = (frame.u0 + position) * factor;
  const double v = (frame.v0 + position) * factor;
  switch (side) {
    case Side::kLeft: return Line{-c, -s, -u};
    case Side::kRight: return Line{c, s, u};
    case Side::kTop: return Line{s, -c, -v};
    case Side::kBottom: return Line{-s, c, v};
  }
  return Line{};
}

}  // namespace beamtrim::field_internal
