// Inline SVG charts: excess histogram, horizontal bars per group, p-chart trend. Each chart
// carries <title>/<desc> for screen readers and is followed by a data table.
#include <algorithm>
#include <cmath>
#include <cstdio>

#include "report/html.h"
#include "report/palette.h"
#include "report/tips.h"

namespace beamtrim::report_internal {
namespace {

namespace pal = report_palette;

std::string Hex(pal::Rgb c) {
  char buf[8];
  std::snprintf(buf, sizeof buf, "#%02x%02x%02x", c.r, c.g, c.b);
  return buf;
}

std::string Num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.1f", v);
  return buf;
}

// The smallest of 1, 2, 2.5, 5 x 10^k at or above v (axis maxima people can read).
double NiceCeil(double v) {
  if (v <= 0) return 1.0;
  const double base = std::pow(10.0, std::floor(std::log10(v)));
  for (double m : {1.0, 2.0, 2.5, 5.0, 10.0}) {
    if (m * base >= v - 1e-12) return m * base;
  }
  return 10.0 * base;
}

std::string SvgOpen(std::string_view id, int w, int h, std::string_view title, std::string_view desc) {
  const std::string i(id);
  return "<svg id=\"" + i + "\" viewBox=\"0 0 " + std::to_string(w) + " " + std::to_string(h) +
         "\" width=\"" + std::to_string(w) + "\" height=\"" + std::to_string(h) +
         "\" role=\"img\" aria-labelledby=\"" + i + "-t " + i + "-d\" xmlns=\"http://www.w3.org/2000/svg\">"
         "<title id=\"" + i + "-t\">" + Escape(title) + "</title><desc id=\"" + i + "-d\">" +
         Escape(desc) + "</desc>\n";
}

std::string Text(double x, double y, std::string_view s, std::string_view anchor = "middle",
                 int size = 12) {
  return "<text x=\"" + Num(x) + "\" y=\"" + Num(y) + "\" text-anchor=\"" + std::string(anchor) +
         "\" font-size=\"" + std::to_string(size) + "\">" + Escape(s) + "</text>";
}

std::string Line(double x1, double y1, double x2, double y2, pal::Rgb c, double width,
                 std::string_view dash = {}) {
  return "<line x1=\"" + Num(x1) + "\" y1=\"" + Num(y1) + "\" x2=\"" + Num(x2) + "\" y2=\"" +
         Num(y2) + "\" stroke=\"" + Hex(c) + "\" stroke-width=\"" + Num(width) + "\"" +
         (dash.empty() ? "" : " stroke-dasharray=\"" + std::string(dash) + "\"") + "/>";
}

std::string DataTable(std::string_view caption, const std::vector<std::string>& heads,
                      const std::vector<std::vector<std::string>>& rows) {
  std::string s = "<details><summary>" + Escape(caption) + " as a table</summary><table><caption>" +
                  Escape(caption) + "</caption><thead><tr>";
  for (size_t i = 0; i < heads.size(); ++i) {
    s += "<th scope=\"col\"" + std::string(i == 0 ? " class=\"l\"" : "") + ">" + Escape(heads[i]) + "</th>";
  }
  s += "</tr></thead><tbody>";
  for (const auto& row : rows) {
    s += "<tr>";
    for (size_t i = 0; i < row.size(); ++i) {
      s += i == 0 ? "<th scope=\"row\">" + Escape(row[i]) + "</th>" : "<td>" + Escape(row[i]) + "</td>";
    }
    s += "</tr>";
  }
  return s + "</tbody></table></details>\n";
}

}  // namespace

std::string HistogramSvg(const std::array<int64_t, 20>& bins, std::string_view id) {
  const int w = 680, h = 260, left = 56, right = 16, top = 22, bottom = 46;
  const double plot_w = w - left - right, plot_h = h - top - bottom;
  int64_t total = 0, peak = 0;
  for (int64_t b : bins) total += b, peak = std::max(peak, b);
  const double y_max = NiceCeil(static_cast<double>(std::max<int64_t>(peak, 1)));
  std::string s = "<div class=\"chart\">" +
                  SvgOpen(id, w, h, "Distribution of the excess fraction",
                          "Histogram of " + std::to_string(total) +
                              " assessable images by the share of the exposed field outside the "
                              "anatomy box, in 5 % steps from 0 to 100 %.");
  for (int k = 0; k <= 4; ++k) {  // y grid and ticks
    const double v = y_max * k / 4.0, y = top + plot_h - plot_h * k / 4.0;
    s += Line(left, y, left + plot_w, y, pal::kPanel, 1) + Text(left - 6, y + 4, Count(std::lround(v)), "end", 11);
  }
  const double bw = plot_w / 20.0;
  for (int i = 0; i < 20; ++i) {
    if (bins[i] == 0) continue;
    const double bh = plot_h * static_cast<double>(bins[i]) / y_max;
    s += "<rect x=\"" + Num(left + i * bw + 1) + "\" y=\"" + Num(top + plot_h - bh) + "\" width=\"" +
         Num(bw - 2) + "\" height=\"" + Num(bh) + "\" fill=\"" + Hex(pal::kChartBar) + "\"/>";
    s += Text(left + (i + 0.5) * bw, top + plot_h - bh - 4, std::to_string(bins[i]), "middle", 10);
  }
  s += Line(left, top + plot_h, left + plot_w, top + plot_h, pal::kInk, 1.2);
  for (int p = 0; p <= 100; p += 25) {
    s += Text(left + plot_w * p / 100.0, top + plot_h + 16, std::to_string(p) + " %", "middle", 11);
  }
  s += Text(left + plot_w / 2, h - 8, "Exposed field outside the anatomy box (excess fraction)", "middle", 12);
  s += "<text x=\"14\" y=\"" + Num(top + plot_h / 2) + "\" transform=\"rotate(-90 14 " +
       Num(top + plot_h / 2) + ")\" text-anchor=\"middle\" font-size=\"12\">Images</text>";
  s += "</svg></div>\n";
  std::vector<std::vector<std::string>> rows;
  for (int i = 0; i < 20; ++i) {
    rows.push_back({std::to_string(5 * i) + "\u2013" + std::to_string(5 * i + 5) + " %", Count(bins[i])});
  }
  return s + DataTable("Distribution of the excess fraction", {"Excess fraction", "Images"}, rows);
}

std::string BarsSvg(const std::vector<Bar>& bars, std::string_view id, std::string_view title,
                    std::optional<double> reference, std::string_view reference_label) {
  const int label_w = 190, bar_w = 380, value_w = 130, row_h = 24, top = 30, bottom = 12;
  const int w = label_w + bar_w + value_w;
  const int h = top + bottom + row_h * static_cast<int>(std::max<size_t>(bars.size(), 1));
  double x_max = reference.value_or(0.0);
  for (const Bar& b : bars) x_max = std::max(x_max, b.percent.value_or(0.0));
  x_max = std::min(100.0, NiceCeil(std::max(x_max, 1.0)));
  std::string s = "<div class=\"chart\">" +
                  SvgOpen(id, w, h, title, std::string(title) + ", one bar per group; the number "
                          "of images behind each bar is written after it.");
  s += Text(label_w, 16, "0 %", "middle", 11) + Text(label_w + bar_w, 16, Pct(x_max, 0), "middle", 11);
  for (size_t i = 0; i < bars.size(); ++i) {
    const Bar& b = bars[i];
    const double y = top + row_h * static_cast<double>(i);
    std::string label = b.label.size() > 26 ? b.label.substr(0, 25) + "\u2026" : b.label;
    s += Text(label_w - 8, y + 16, label, "end", 12);
    if (b.percent) {
      const double len = bar_w * std::clamp(*b.percent / x_max, 0.0, 1.0);
      s += "<rect x=\"" + Num(label_w) + "\" y=\"" + Num(y + 4) + "\" width=\"" + Num(len) +
           "\" height=\"" + Num(row_h - 8) + "\" fill=\"" + Hex(pal::kChartBar) + "\"/>";
      s += Text(label_w + len + 6, y + 16, Pct(b.percent, 1) + " (n=" + std::to_string(b.n) + ")", "start", 11);
    } else {
      s += Text(label_w + 6, y + 16, "no assessable images", "start", 11);
    }
  }
  s += Line(label_w, top - 4, label_w, h - bottom, pal::kInk, 1.2);
  if (reference) {
    const double x = label_w + bar_w * std::clamp(*reference / x_max, 0.0, 1.0);
    s += Line(x, top - 6, x, h - bottom + 4, pal::kInk, 1.5, "5 3");
    s += Text(x, top - 10, std::string(reference_label) + " " + Pct(reference, 1), "middle", 11);
  }
  return s + "</svg></div>\n";
}

std::string PChartSvg(const std::vector<TrendPoint>& points, std::string_view id,
                      std::string_view title) {
  const int w = 680, h = 280, left = 56, right = 24, top = 20, bottom = 58;
  const double plot_w = w - left - right, plot_h = h - top - bottom;
  if (points.empty()) {
    return "<p class=\"meta\">No assessable images up to this month, so there is no trend.</p>\n";
  }
  double y_max = 0.05;
  for (const TrendPoint& p : points) y_max = std::max({y_max, p.rate, p.limits.upper});
  y_max = std::min(1.0, NiceCeil(y_max * 100.0) / 100.0);
  const size_t n = points.size();
  auto x_of = [&](size_t i) { return left + plot_w * (n == 1 ? 0.5 : (i + 0.5) / n); };
  auto y_of = [&](double p) { return top + plot_h * (1.0 - p / y_max); };
  std::string s = "<div class=\"chart\">" +
                  SvgOpen(id, w, h, title,
                          "p-chart: share of assessable images needing review per month (solid "
                          "line, round markers; a month beyond a control limit has a triangle "
                          "marker and an exclamation mark), centre line (grey, long dashes) and "
                          "3-sigma control limits (short dashes).");
  for (int k = 0; k <= 4; ++k) {
    const double v = y_max * k / 4.0;
    s += Line(left, y_of(v), left + plot_w, y_of(v), pal::kPanel, 1) + Text(left - 6, y_of(v) + 4, Pct(100 * v, 0), "end", 11);
  }
  const double half = plot_w / (2.0 * n);
  for (size_t i = 0; i < n; ++i) {  // limits as steps: they widen when a month has fewer images
    s += Line(x_of(i) - half, y_of(points[i].limits.upper), x_of(i) + half, y_of(points[i].limits.upper), pal::kChartLimit, 1.6, "4 3");
    s += Line(x_of(i) - half, y_of(points[i].limits.lower), x_of(i) + half, y_of(points[i].limits.lower), pal::kChartLimit, 1.6, "4 3");
  }
  s += Line(left, y_of(points[0].limits.centre), left + plot_w, y_of(points[0].limits.centre), pal::kRule, 1.5, "10 4");
  std::string path;
  for (size_t i = 0; i < n; ++i) path += (i == 0 ? "M" : " L") + Num(x_of(i)) + " " + Num(y_of(points[i].rate));
  s += "<path d=\"" + path + "\" fill=\"none\" stroke=\"" + Hex(pal::kChartBar) + "\" stroke-width=\"2.2\"/>";
  for (size_t i = 0; i < n; ++i) {
    const double x = x_of(i), y = y_of(points[i].rate);
    if (points[i].out_of_control) {
      s += "<path d=\"M" + Num(x) + " " + Num(y - 7) + " L" + Num(x + 7) + " " + Num(y + 5) + " L" +
           Num(x - 7) + " " + Num(y + 5) + " Z\" fill=\"" + Hex(pal::kChartLimit) + "\" stroke=\"#000\"/>";
      s += Text(x, y - 11, "!", "middle", 13);
    } else {
      s += "<circle cx=\"" + Num(x) + "\" cy=\"" + Num(y) + "\" r=\"4\" fill=\"" + Hex(pal::kChartBar) + "\"/>";
    }
    s += Text(x, top + plot_h + 16, points[i].month, "middle", 10);
  }
  s += Line(left, top + plot_h, left + plot_w, top + plot_h, pal::kInk, 1.2);
  s += Text(left + plot_w / 2, h - 18, "Study month; centre line " + Pct(100 * points[0].limits.centre, 1) +
            ", limits p\u0304 \u00b1 3\u221a(p\u0304(1\u2212p\u0304)/n)", "middle", 11);
  s += "</svg></div>\n";
  std::vector<std::vector<std::string>> rows;
  for (const TrendPoint& p : points) {
    rows.push_back({p.month, Count(p.n), Count(p.nonconforming), Pct(100 * p.rate),
                    Pct(100 * p.limits.lower), Pct(100 * p.limits.upper), p.out_of_control ? "beyond a limit" : "within limits"});
  }
  return s + DataTable(title, {"Month", "Assessable", "Needs review", "Share", "Lower limit",
                               "Upper limit", "Signal"}, rows);
}

}  // namespace beamtrim::report_internal
