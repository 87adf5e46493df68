// Coaching tips: short sentences a radiographer can act on, each tied to one of their figures.
#include "report/tips.h"

#include <cstdio>

namespace beamtrim::report_internal {
namespace {

const char* SidePhrase(int side) {
  static constexpr const char* kPhrases[] = {"left", "right", "top", "bottom"};
  return kPhrases[side];
}

}  // namespace

std::string FormatPercent(double percent, int decimals) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.*f %%", decimals, percent);
  return buf;
}

std::vector<std::string> FeedbackTips(const ReportFigures& person, const ReportFigures& dept) {
  std::vector<std::string> tips;
  if (person.images == 0) {
    tips.push_back("No measured images this month, so there is nothing to suggest yet.");
    return tips;
  }
  // The side most often left without a visible border.
  int worst = -1;
  for (int s = 0; s < 4; ++s) {
    if (worst < 0 || person.side_without_border[s] > person.side_without_border[worst]) worst = s;
  }
  const int64_t open = person.side_without_border[worst];
  if (person.with_field > 0 && open >= 1 &&
      static_cast<double>(open) / static_cast<double>(person.with_field) >= kSideTipShare) {
    tips.push_back("The " + std::string(SidePhrase(worst)) +
                   " edge of the image most often had no collimation border (" +
                   std::to_string(open) + " of " + std::to_string(person.with_field) +
                   " images). Bringing that blade in until its shadow shows on the image is the "
                   "quickest gain.");
  }
  if (person.median_excess && dept.median_excess) {
    const double mine = 100.0 * *person.median_excess, theirs = 100.0 * *dept.median_excess;
    if (mine - theirs >= kExcessTipPoints) {
      tips.push_back("Half of your assessed images had more than " + FormatPercent(mine, 0) +
                     " of the field outside the anatomy, against " + FormatPercent(theirs, 0) +
                     " for the department. Setting the light field to the anatomy plus the "
                     "exam's margin before exposure would bring this down.");
    } else {
      tips.push_back("Your median excess area (" + FormatPercent(mine, 0) +
                     " of the field) is close to or below the department's (" +
                     FormatPercent(theirs, 0) + "): keep collimating this way.");
    }
  }
  if (person.clipped > 0) {
    tips.push_back("On " + std::to_string(person.clipped) +
                   (person.clipped == 1 ? " image" : " images") +
                   " the anatomy ran into a blade edge. A repeat costs more dose than a small "
                   "margin: check the whole region of interest is inside the light field.");
  }
  if (person.masked_or_cropped > 0) {
    tips.push_back(std::to_string(person.masked_or_cropped) +
                   (person.masked_or_cropped == 1 ? " image was" : " images were") +
                   " masked or cropped after exposure. Masking hides the exposed area but does "
                   "not reduce the dose; collimating the beam does.");
  }
  return tips;
}

}  // namespace beamtrim::report_internal
