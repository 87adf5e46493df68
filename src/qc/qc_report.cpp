// The one-page QC report: a self-contained HTML page (inline style, the overlay as a PNG data
// URI) with the windowed image, the x-ray edges, the light edges and the markers drawn on it,
// the per-edge and pass/fail tables, the room's QC history and the cautions.
#include <algorithm>
#include <cmath>
#include <cstdio>

#include <opencv2/imgproc.hpp>

#include "beamtrim/overlay.h"
#include "beamtrim/qc.h"
#include "report/html.h"
#include "report/palette.h"

namespace beamtrim {
namespace {

namespace pal = report_palette;
using report_internal::Escape;

constexpr int kOverlayWidth = 760;

cv::Scalar Bgr(pal::Rgb c) { return cv::Scalar(c.b, c.g, c.r); }

bool IsVertical(Side side) { return side == Side::kLeft || side == Side::kRight; }

// Pixel coordinate of an outward distance from the receptor centre.
double ToPixel(const QcResult& r, Side side, double mm) {
  switch (side) {
    case Side::kLeft: return 0.5 * r.width - mm / r.spacing_mm[1];
    case Side::kRight: return 0.5 * r.width + mm / r.spacing_mm[1];
    case Side::kTop: return 0.5 * r.height - mm / r.spacing_mm[0];
    case Side::kBottom: return 0.5 * r.height + mm / r.spacing_mm[0];
  }
  return 0.0;
}

void DashedLine(cv::Mat& img, cv::Point2d a, cv::Point2d b, cv::Scalar colour, int thickness) {
  double len = std::hypot(b.x - a.x, b.y - a.y);
  const double dash = 10.0;
  for (double t = 0.0; t < len; t += 2 * dash) {
    double t1 = std::min(len, t + dash);
    cv::line(img, a + (b - a) * (t / len), a + (b - a) * (t1 / len), colour, thickness, cv::LINE_AA);
  }
}

void DrawEdges(const QcResult& r, double scale, cv::Mat& canvas) {
  for (const QcEdge& e : r.edges) {
    if (e.xray_line_px) {
      const Line& l = *e.xray_line_px;
      cv::Point2d a, b;
      if (IsVertical(e.side)) {
        a = {(l.c - l.ny * 0) / l.nx, 0.0};
        b = {(l.c - l.ny * r.height) / l.nx, double(r.height)};
      } else {
        a = {0.0, (l.c - l.nx * 0) / l.ny};
        b = {double(r.width), (l.c - l.nx * r.width) / l.ny};
      }
      cv::line(canvas, a * scale, b * scale, Bgr(pal::kVermillion), 2, cv::LINE_AA);
    }
    if (e.light_mm) {
      double p = ToPixel(r, e.side, *e.light_mm) * scale;
      cv::Point2d a = IsVertical(e.side) ? cv::Point2d(p, 0) : cv::Point2d(0, p);
      cv::Point2d b = IsVertical(e.side) ? cv::Point2d(p, canvas.rows) : cv::Point2d(canvas.cols, p);
      DashedLine(canvas, a, b, Bgr(pal::kSkyBlue), 2);
    }
  }
  for (const QcMarker& m : r.markers) {
    std::vector<cv::Point> hull;
    for (const Point2d& p : m.outline_px) hull.emplace_back(int(p.x * scale), int(p.y * scale));
    if (hull.size() >= 2) cv::polylines(canvas, hull, true, Bgr(pal::kOrange), 2, cv::LINE_AA);
    cv::drawMarker(canvas, cv::Point2d(m.centre_px.x, m.centre_px.y) * scale, Bgr(pal::kOrange),
                   cv::MARKER_CROSS, 12, 2);
  }
}

Result<std::string> OverlayDataUri(const QcResult& r, const Image& image) {
  if (image.empty() || image.width() != r.width || image.height() != r.height) {
    return MakeError(ErrorKind::kInvalidInput, r.image_file, "the image does not match the QC result");
  }
  DisplayWindow window = ComputeDisplayWindow(image, r.linear);
  std::vector<uint8_t> grey = ApplyDisplayWindow(image, window);
  cv::Mat grey_mat(image.height(), image.width(), CV_8U, grey.data());
  double scale = std::min(1.0, double(kOverlayWidth) / image.width());
  cv::Mat small, canvas;
  cv::resize(grey_mat, small, cv::Size(), scale, scale, cv::INTER_AREA);
  cv::cvtColor(small, canvas, cv::COLOR_GRAY2BGR);
  DrawEdges(r, scale, canvas);
  RgbImage rgb;
  rgb.width = canvas.cols;
  rgb.height = canvas.rows;
  cv::Mat rgb_mat;
  cv::cvtColor(canvas, rgb_mat, cv::COLOR_BGR2RGB);
  rgb.rgb.assign(rgb_mat.data, rgb_mat.data + rgb_mat.total() * 3);
  auto png = EncodePng(rgb);
  if (!png.ok()) return png.error();
  return "data:image/png;base64," + Base64Encode(png.value());
}

std::string Num(const std::optional<double>& v, const char* format = "%.1f") {
  if (!v) return "&ndash;";
  char text[32];
  std::snprintf(text, sizeof text, format, *v);
  return text;
}

std::string VerdictCell(const QcCheck& c) {
  if (!c.value_mm) return "<td class=\"l\">not assessed</td>";
  if (!c.pass) return "<td class=\"l\">no verdict (SID unknown)</td>";
  return *c.pass ? "<td class=\"l\"><strong>pass</strong></td>"
                 : "<td class=\"l\" style=\"color:#a33a00\"><strong>FAIL</strong></td>";
}

std::string EdgeTable(const QcResult& r) {
  std::string s =
      "<table><caption>Edges (mm from the receptor centre, detector plane; misalignment = x-ray "
      "minus light, positive when the x-ray field reaches beyond the light field)</caption>\n"
      "<thead><tr><th class=\"l\">Edge</th><th>X-ray</th><th>Light</th><th>Misalignment mm</th>"
      "<th>% of SID</th><th>Header collimator</th><th class=\"l\">Light edge from</th></tr></thead><tbody>\n";
  for (const QcEdge& e : r.edges) {
    s += "<tr><th scope=\"row\">" + std::string(SideName(e.side)) + "</th><td>" + Num(e.xray_mm) +
         "</td><td>" + Num(e.light_mm) + "</td><td>" + Num(e.misalignment_mm, "%+.1f") +
         "</td><td>" + Num(e.misalignment_pct_sid, "%+.2f") + "</td><td>" +
         Num(e.declared_mm) + "</td><td class=\"l\">" +
         Escape(e.light_source.empty() ? e.note : e.light_source) + "</td></tr>\n";
  }
  return s + "</tbody></table>\n";
}

std::string CheckTable(const QcResult& r) {
  std::string s =
      "<table><caption>Checks against 2 % of SID (21 CFR 1020.31(d), (e))</caption>\n"
      "<thead><tr><th class=\"l\">Check</th><th>Value mm</th><th>% of SID</th><th>Limit mm</th>"
      "<th class=\"l\">Verdict</th><th class=\"l\">Note</th></tr></thead><tbody>\n";
  for (const QcCheck* c : {&r.width_axis, &r.length_axis, &r.centre, &r.size_width, &r.size_height}) {
    s += "<tr><th scope=\"row\">" + Escape(c->name) + "</th><td>" + Num(c->value_mm) + "</td><td>" +
         Num(c->value_pct_sid, "%.2f") + "</td><td>" + Num(c->limit_mm) + "</td>" +
         VerdictCell(*c) + "<td class=\"l\">" + Escape(c->note) + "</td></tr>\n";
  }
  return s + "</tbody></table>\n";
}

std::string HistoryTable(const std::vector<QcHistoryRow>& history) {
  if (history.empty()) return "<p class=\"meta\">No earlier QC records for this room in the store.</p>\n";
  std::string s =
      "<table><caption>QC history of this room</caption><thead><tr><th class=\"l\">Date</th>"
      "<th>SID mm</th><th>Left + right mm</th><th>Top + bottom mm</th><th>Centre mm</th>"
      "<th class=\"l\">Overall</th></tr></thead><tbody>\n";
  for (const QcHistoryRow& h : history) {
    s += "<tr><td class=\"l\">" + Escape(h.date) + "</td><td>" + Num(h.sid_mm, "%.0f") + "</td><td>" +
         Num(h.width_sum_mm) + "</td><td>" + Num(h.length_sum_mm) + "</td><td>" +
         Num(h.centre_mm) + "</td><td class=\"l\">" + Escape(h.overall) + "</td></tr>\n";
  }
  return s + "</tbody></table>\n";
}

std::string Cautions() {
  return "<aside class=\"caution\" aria-labelledby=\"qc-caution\"><h2 id=\"qc-caution\">Cautions</h2><ul>"
         "<li>The limits shown are those of US 21 CFR 1020.31 (2 % of SID). Local regulations, the "
         "department's QC protocol and the medical physicist's judgement decide whether the "
         "beam-limiting device is acceptable.</li>"
         "<li>The light edges come from the markers as laid (or from the values entered): a "
         "marker placed off the light edge moves the result by the same amount.</li>"
         "<li>Edges are measured at the detector plane; a marker raised above the receptor is "
         "magnified.</li></ul></aside>\n";
}

}  // namespace

Result<std::string> RenderQcReportHtml(const QcResult& r, const Image& image,
                                       const std::vector<QcHistoryRow>& history) {
  auto uri = OverlayDataUri(r, image);
  if (!uri.ok()) return uri.error();
  std::string room = r.station.empty() ? "(room unknown)" : r.station;
  std::string s = report_internal::PageStart("QC light field / x-ray field, " + room);
  s += "<header class=\"masthead\"><p class=\"kicker\">Beam-limiting device QC</p><h1>Light field "
       "and x-ray field congruence</h1>\n<p class=\"meta\">Room " + Escape(room) + " &middot; exposure date " +
       Escape(r.date.empty() ? "unknown" : r.date) + " &middot; SID " +
       (r.sid_mm ? Num(r.sid_mm, "%.0f") + " mm (" + Escape(r.sid_source) + ")" : std::string("unknown")) +
       " &middot; x-ray edge definition: " + EdgeDefinitionName(r.edge_definition) + "</p>\n";
  s += "<p><strong>Overall: " + Escape(r.overall) + "</strong></p></header>\n<main>\n";
  s += "<figure class=\"case\" style=\"max-width:48rem\"><img src=\"" + uri.value() +
       "\" alt=\"QC exposure with the x-ray field edges (solid), the light-field edges (dashed) and "
       "the markers found (outlined, with a cross at each centre)\">\n<figcaption>Solid vermillion: "
       "x-ray field edges. Dashed blue: light-field edges. Orange outline and cross: markers found "
       "(" + std::to_string(r.markers.size()) + ").</figcaption></figure>\n";
  s += CheckTable(r) + EdgeTable(r);
  std::vector<std::string> notes;
  for (const QcEdge& e : r.edges) if (!e.note.empty() && !e.light_source.empty()) notes.push_back(e.note);
  notes.insert(notes.end(), r.notes.begin(), r.notes.end());
  if (!notes.empty()) {
    s += "<h2>Notes</h2><ul>";
    for (const std::string& n : notes) s += "<li>" + Escape(n) + "</li>";
    s += "</ul>\n";
  }
  s += "<h2>History</h2>\n" + HistoryTable(history) + Cautions() + "</main>\n";
  s += report_internal::PageEnd();
  return s;
}

}  // namespace beamtrim
