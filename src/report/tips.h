// Plain-language coaching tips for a feedback sheet, derived from a radiographer's figures
// beside the department's. Pure function; thread-safe. Internal to the report layer.
#pragma once

#include <string>
#include <vector>

#include "beamtrim/report.h"

namespace beamtrim::report_internal {

// Thresholds below which a difference is not worth a tip (common practice, no single source):
// a side left without a border on at least 10 % of images, a median excess at least 5
// percentage points above the department's.
inline constexpr double kSideTipShare = 0.10;
inline constexpr double kExcessTipPoints = 5.0;

std::vector<std::string> FeedbackTips(const ReportFigures& person, const ReportFigures& department);

// "12.3 %" style formatting shared by the HTML writers.
std::string FormatPercent(double percent, int decimals = 1);

}  // namespace beamtrim::report_internal
