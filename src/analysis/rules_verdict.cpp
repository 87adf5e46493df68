// The verdict: a measured record judged under one rule, with reasons in plain words
// (docs/rules.md).
#include <algorithm>
#include <cmath>
#include <cstdio>

#include "beamtrim/metrics.h"
#include "beamtrim/record.h"
#include "beamtrim/rules.h"

namespace beamtrim {
namespace {

std::string JoinSides(const std::vector<Side>& sides) {
  std::string out;
  for (size_t i = 0; i < sides.size(); ++i) {
    if (i > 0) out += i + 1 == sides.size() ? " and " : ", ";
    out += SideName(sides[i]);
  }
  return out;
}

std::string Plural(size_t n, const char* one, const char* many) { return n == 1 ? one : many; }

std::string Percent(double fraction) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.0f %%", 100.0 * fraction);
  return buf;
}

std::string Number(double v, const char* format) {
  char buf[48];
  std::snprintf(buf, sizeof buf, format, v);
  return buf;
}

struct Findings {
  std::vector<std::string> review;      // a fault was found
  std::vector<std::string> unassessed;  // something could not be judged
  std::vector<std::string> info;        // what was fine
};

void JudgeBorders(const FieldMeasurement& f, const Rule& rule, Findings& out) {
  std::vector<Side> hidden, missing;
  for (Side side : kAllSides) {
    const auto& masked = f.blanked_or_cropped_sides;
    if (std::find(masked.begin(), masked.end(), side) != masked.end()) {
      hidden.push_back(side);
    } else if (!f.side(side).visible) {
      missing.push_back(side);
    }
  }
  if (!hidden.empty()) {
    out.unassessed.push_back(
        "the " + JoinSides(hidden) + Plural(hidden.size(), " side was", " sides were") +
        " masked or cropped after the exposure, so the collimation there cannot be judged "
        "(masking is not a substitute for collimation)");
  }
  if (!missing.empty()) {
    std::string text = "no collimation border on the " + JoinSides(missing) +
                       Plural(missing.size(), " side", " sides") +
                       ": the field runs off the image there";
    (rule.require_all_borders ? out.review : out.unassessed).push_back(text);
  }
}

void JudgeExcess(const ImageRecord& r, const Rule& rule, bool partial, Findings& out) {
  const ExcessMeasurement& e = *r.excess;
  std::optional<double> fraction = e.fraction_at_margin;
  std::string margin = "the anatomy plus a " + Number(e.margin_mm, "%.0f") + " mm margin";
  if (!fraction) {
    fraction = e.fraction_at_0mm;
    margin = "the anatomy (pixel size unknown, so no margin could be added)";
  }
  if (!fraction) {
    out.unassessed.push_back("the exposed area outside the anatomy could not be measured");
    return;
  }
  std::string text = Percent(*fraction) + " of the exposed field lies outside " + margin +
                     " (this exam allows " + Percent(rule.max_excess_fraction) + ")";
  if (partial) text += ", measured on the visible part of the field only";
  if (*fraction <= rule.max_excess_fraction) {
    (partial ? out.unassessed : out.info).push_back(text);
    return;
  }
  out.review.push_back(text);
  std::vector<std::string> sides;
  for (Side side : kAllSides) {
    const auto& mm = e.per_side_mm[static_cast<int>(side)];
    if (mm && *mm > e.margin_mm + 5.0) {
      sides.push_back(std::string(SideName(side)) + " " + Number(*mm - e.margin_mm, "%.0f") + " mm");
    }
  }
  if (!sides.empty()) {
    std::string list;
    for (size_t i = 0; i < sides.size(); ++i) list += (i ? ", " : "") + sides[i];
    out.review.push_back("the blades could have closed in further beyond the margin by about: " +
                         list);
  }
  if (r.dose && r.dose->avoidable_kap_dgy_cm2) {
    out.review.push_back("about " + Number(*r.dose->avoidable_kap_dgy_cm2, "%.3g") +
                         " dGy cm2 of the KAP fell outside the anatomy (estimate for quality "
                         "improvement, uniform field assumed; not a patient dose record)");
  }
}

// Judged under `rule` from the edges the anatomy runs into, its ends and continuing end (a
// record carries all three, also when read back from JSON); a record without at-blade sides
// (written before they were recorded) keeps its clipped_sides as judged then.
void JudgeClipping(const AnatomyMeasurement& a, const Rule& rule, Findings& out) {
  std::vector<Side> cut = a.at_blade_sides.empty()
                              ? a.clipped_sides
                              : CutOffSides(a.at_blade_sides, a.ends, a.continuing_end, rule);
  std::vector<Side> through;  // edges the body is expected to run through for this exam
  for (Side side : a.at_blade_sides) {
    if (std::find(cut.begin(), cut.end(), side) == cut.end()) through.push_back(side);
  }
  if (!through.empty()) {
    std::string text = "the body runs through the " + JoinSides(through) + " blade " +
                       Plural(through.size(), "edge", "edges") + ", as expected for this exam";
    if (rule.continues_through == Continuation::kAllSides) {
      text += " (whether the organs the exam needs were cut off cannot be judged from the body "
              "outline)";
    }
    out.info.push_back(text);
  }
  size_t n = cut.size();
  if (n == 0) return;
  std::string text = "the anatomy runs into the " + JoinSides(cut) + " blade " +
                     Plural(n, "edge", "edges") + " where this exam expects it to end inside the field";
  if (static_cast<int>(n) > rule.clipped_sides_allowed) {
    out.review.push_back(text + ": possible cut-off of needed anatomy, a repeat risk");
  } else {
    out.info.push_back(text + " (this exam tolerates " + std::to_string(rule.clipped_sides_allowed) +
                       ")");
  }
}

void JudgeDeclared(const DeclaredComparison& d, Findings& out) {
  std::vector<Side> beyond;
  for (const DeclaredEdgeDeviation& e : d.edges) {
    if (e.beyond_limit) beyond.push_back(e.side);
  }
  if (beyond.empty()) return;
  out.review.push_back("the declared " + d.source + " " + JoinSides(beyond) + " " +
                       Plural(beyond.size(), "edge differs", "edges differ") +
                       " from the detected one by more than 2 % of SID (21 CFR 1020.31): "
                       "have the collimator checked");
}

}  // namespace

Verdict Decide(const ImageRecord& r, const Rule& rule) {
  Verdict v;
  v.rule = rule.name;
  auto not_assessable = [&v](std::string why) {
    v.outcome = "not assessable";
    v.reasons.push_back(std::move(why));
    return v;
  };
  if (!r.field || r.field->polygon_px.size() < 3 || r.field->area_px <= 0.0) {
    return not_assessable("no exposed field was found on the image");
  }
  const FieldMeasurement& f = *r.field;
  if (f.open) {
    v.outcome = rule.require_all_borders ? "needs review" : "not assessable";
    v.reasons.push_back("no collimation border is visible on any side: the field is at least "
                        "as large as the image");
    return v;
  }
  if (!r.anatomy || !r.anatomy->found) return not_assessable("no anatomy was found inside the field");
  Findings found;
  JudgeBorders(f, rule, found);
  bool partial = false;
  for (Side side : kAllSides) partial = partial || !f.side(side).visible;
  if (r.excess) JudgeExcess(r, rule, partial, found);
  JudgeClipping(*r.anatomy, rule, found);
  if (r.declared) JudgeDeclared(*r.declared, found);
  if (f.double_exposure) found.review.push_back("more than one exposed field on the plate");
  if (!found.review.empty()) {
    v.outcome = "needs review";
    v.reasons = found.review;
    v.reasons.insert(v.reasons.end(), found.unassessed.begin(), found.unassessed.end());
  } else if (!found.unassessed.empty()) {
    v.outcome = "not assessable";
    v.reasons = found.unassessed;
  } else {
    v.outcome = "acceptable";
    v.reasons = found.info;
  }
  return v;
}

}  // namespace beamtrim
