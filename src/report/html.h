// HTML building blocks shared by the department report and the feedback sheets: escaping,
// number formats, the page shell with its inline style sheet, SVG charts and figure tables.
// Pure functions; thread-safe. Internal to the report layer.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "beamtrim/report.h"

namespace beamtrim::report_internal {

std::string Escape(std::string_view text);

// "12.3 %" or an en dash when unknown.
std::string Pct(std::optional<double> percent, int decimals = 1);
// Fraction 0..1 shown as percent.
std::string FractionPct(std::optional<double> fraction, int decimals = 1);
std::string Count(int64_t n);  // 20 000 with a thin space
// Dose-area in Gy*cm2 from dGy*cm2, 2 decimals.
std::string Kap(double dgy_cm2);

// <!doctype html> ... <body>, with the inline style sheet; `title` is escaped.
std::string PageStart(std::string_view title);
std::string PageEnd();
// The cautions every page shows, as an <aside>.
std::string CautionsBox(bool long_form);

// Charts as inline SVG with <title>/<desc> and role="img"; each is followed by a hidden-until-
// opened data table so the numbers never depend on reading the picture.
std::string HistogramSvg(const std::array<int64_t, 20>& bins, std::string_view id);
struct Bar {
  std::string label;
  std::optional<double> percent;  // bar length, 0..100
  int64_t n = 0;                  // images behind it, printed beside the bar
};
std::string BarsSvg(const std::vector<Bar>& bars, std::string_view id, std::string_view title,
                    std::optional<double> reference_percent, std::string_view reference_label);
std::string PChartSvg(const std::vector<TrendPoint>& points, std::string_view id,
                      std::string_view title);

// A table of figures per group; `label_heading` names the first column.
std::string GroupTable(const std::vector<GroupFigures>& groups, std::string_view caption,
                       std::string_view label_heading);
// One case as a <figure>: thumbnail (or a note), caption with the case's figures.
std::string CaseFigure(const CaseSummary& c, bool show_radiographer);
// Each room's clinical figures beside its QC records (light field / x-ray field checks), with
// the QC caution; the latest `max_checks` records per room, newest first.
std::string RoomQcTable(const std::vector<RoomQcHistory>& rooms, size_t max_checks = 4);
// The overlay legend in HTML (text and line samples, matching the thumbnails).
std::string OverlayLegend();

}  // namespace beamtrim::report_internal
