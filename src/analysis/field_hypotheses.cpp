// Rectangle hypotheses: at one field angle, each side is either a blade line from its
// candidates or "beyond the image"; the four choices are made by coordinate ascent, each side
// tested over the span left open by the perpendicular pair.
#include <algorithm>
#include <cmath>

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
Span SpanFor(const Rectangle& r, Side s, const Frame& f) {
  const int gap = 3;
  Span span{0, Vertical(s) ? f.value.rows : f.value.cols};
  const auto& lo = r.sides[static_cast<int>(Vertical(s) ? Side::kTop : Side::kLeft)];
  const auto& hi = r.sides[static_cast<int>(Vertical(s) ? Side::kBottom : Side::kRight)];
  if (lo) span.lo = static_cast<int>(lo->position) + gap;
  if (hi) span.hi = static_cast<int>(hi->position) - gap;
  if (span.hi <= span.lo) span = {span.lo - gap, span.hi + gap};
  return span;
}

// The opposite side must leave a field of at least a few working pixels.
bool Compatible(const Rectangle& r, Side s, double position) {
  const auto& other = r.sides[static_cast<int>(Opposite(s))];
  if (!other) return true;
  const double min_size = 4.0;
  const bool low = s == Side::kLeft || s == Side::kTop;
  return low ? position + min_size <= other->position : other->position + min_size <= position;
}

// All blades block the same beam: every blocked plateau lies well below the open level of the
// strongest side. A side whose "outside" is as bright as that open level is not a blade
// (typically an edge-enhancement halo or an anatomy edge inside the field).
void DropInconsistent(Rectangle& r) {
  const SideEvidence* ref = nullptr;
  for (const auto& s : r.sides) {
    if (s && (!ref || s->score > ref->score)) ref = &*s;
  }
  if (!ref) return;
  const double limit = ref->outside + 0.5 * (ref->inside - ref->outside);
  const double ref_outside = ref->outside, ref_inside = ref->inside;
  for (auto& s : r.sides) {
    if (s && (s->outside > limit || s->inside < ref_outside + 0.25 * (ref_inside - ref_outside))) {
      s.reset();
    }
  }
}

}  // namespace

Rectangle BestRectangle(const Frame& frame, double range, double depth_px) {
  Rectangle r;
  r.angle_deg = frame.angle_deg;
  for (int pass = 0; pass < 4; ++pass) {
    bool changed = false;
    for (Side s : kAllSides) {
      const Span span = SpanFor(r, s, frame);
      const bool bounded = pass > 0;
      std::optional<SideEvidence> best;
      for (int p : SideCandidates(frame, s, span, 6)) {
        if (!Compatible(r, s, p)) continue;
        SideEvidence ev = EvaluateSide(frame, s, p, span, range, depth_px, bounded);
        if (ev.blade && (!best || ev.score > best->score)) best = ev;
      }
      auto& slot = r.sides[static_cast<int>(s)];
      const bool differs = best.has_value() != slot.has_value() ||
                           (best && slot && best->position != slot->position);
      changed |= differs;
      slot = best;
    }
    DropInconsistent(r);
    if (!changed && pass > 0) break;
  }
  // Final check of every side over the span its neighbours leave.
  for (Side s : kAllSides) {
    auto& slot = r.sides[static_cast<int>(s)];
    if (!slot) continue;
    SideEvidence ev = EvaluateSide(frame, s, static_cast<int>(slot->position), SpanFor(r, s, frame),
                                   range, depth_px, true);
    if (ev.blade) slot = ev; else slot.reset();
  }
  DropInconsistent(r);
  // A side with bright regions far beyond its dark strip is kept only when a side with a
  // clean half-plane shows the same blocked level (a second exposure beyond a real blade);
  // otherwise it is more likely an anatomy edge with tissue beyond.
  for (Side s : kAllSides) {
    auto& slot = r.sides[static_cast<int>(s)];
    if (!slot || slot->bright_far <= 0.1) continue;
    bool confirmed = false;
    for (const auto& other : r.sides) {
      if (other && other->bright_far <= 0.1 && slot->bright <= 0.02 &&
          std::fabs(other->outside - slot->outside) <= 0.3 * slot->step) {
        confirmed = true;
      }
    }
    if (!confirmed) slot.reset();
  }
  r.score = 0.0;
  for (const auto& s : r.sides) r.score += s ? s->score : 0.0;
  return r;
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
