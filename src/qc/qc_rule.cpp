// The 2 % of SID checks of 21 CFR 1020.31: light-field / x-ray-field misalignment summed over
// the two opposite edges of an axis (paragraph (d)), field centre and indicated field size
// (paragraph (e)). Values below the limit, or equal to it, pass.
#include <cmath>

#include "beamtrim/qc.h"

namespace beamtrim {

double TwoPercentOfSidMm(double sid_mm) { return 0.02 * sid_mm; }

double PercentOfSid(double mm, double sid_mm) { return 100.0 * mm / sid_mm; }

QcCheck CheckOppositeEdges(const std::string& name, std::optional<double> first_mm,
                           std::optional<double> second_mm, std::optional<double> sid_mm) {
  QcCheck check;
  check.name = name;
  if (!first_mm || !second_mm) {
    check.note = "not assessed: the light or x-ray edge is missing on " +
                 std::string(!first_mm && !second_mm ? "both sides" : "one side");
    return check;
  }
  // The regulation limits the total misalignment of the two edges of an axis; an edge that
  // lies inside and one that lies outside do not cancel, so magnitudes are added.
  double sum = std::fabs(*first_mm) + std::fabs(*second_mm);
  return CheckAgainstTwoPercent(name, sum, sid_mm);
}

QcCheck CheckAgainstTwoPercent(const std::string& name, std::optional<double> value_mm,
                               std::optional<double> sid_mm) {
  QcCheck check;
  check.name = name;
  if (!value_mm) {
    check.note = "not assessed";
    return check;
  }
  check.value_mm = value_mm;
  if (!sid_mm || *sid_mm <= 0.0) {
    check.note = "SID unknown: reported in mm only, no pass/fail";
    return check;
  }
  check.value_pct_sid = PercentOfSid(*value_mm, *sid_mm);
  check.limit_mm = TwoPercentOfSidMm(*sid_mm);
  check.pass = *value_mm <= *check.limit_mm;
  return check;
}

}  // namespace beamtrim
