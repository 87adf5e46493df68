// Overlay drawing: field border per side (colour + line style), anatomy box, hatched excess
// area, side labels and a legend strip, on the windowed radiograph.
#include <algorithm>
#include <cmath>
#include <string>

#include <opencv2/core.hpp>
#include <opencv2/imgproc.hpp>

#include "beamtrim/overlay.h"
#include "report/palette.h"

namespace beamtrim {
namespace {

namespace pal = report_palette;

enum class LineStyle { kSolid, kDashed, kDotted, kDashDot, kTicked };

cv::Scalar ToScalar(pal::Rgb c) { return cv::Scalar(c.r, c.g, c.b); }  // the canvas is RGB

struct StateStyle {
  pal::Rgb colour;
  LineStyle style;
};

StateStyle StyleFor(SideState state) {
  switch (state) {
    case SideState::kVisible: return {pal::kBorderVisible, LineStyle::kSolid};
    case SideState::kNotVisible: return {pal::kBorderNotVisible, LineStyle::kDashed};
    case SideState::kClipped: return {pal::kBorderClipped, LineStyle::kTicked};
    case SideState::kNotAssessable: return {pal::kBorderNotAssessable, LineStyle::kDashDot};
  }
  return {pal::kBorderVisible, LineStyle::kSolid};
}

// Pieces of a patterned line as [start, end) distances along it.
std::vector<std::pair<double, double>> Pattern(LineStyle style, double length, int thickness) {
  std::vector<double> on_off;
  const double t = thickness;
  switch (style) {
    case LineStyle::kDashed: on_off = {6 * t, 4 * t}; break;
    case LineStyle::kDotted: on_off = {1.2 * t, 2.2 * t}; break;
    case LineStyle::kDashDot: on_off = {6 * t, 2.5 * t, 1.2 * t, 2.5 * t}; break;
    default: return {{0.0, length}};
  }
  std::vector<std::pair<double, double>> pieces;
  double pos = 0.0;
  for (size_t i = 0; pos < length; i = (i + 1) % on_off.size()) {
    const double next = std::min(length, pos + on_off[i]);
    if (i % 2 == 0) pieces.emplace_back(pos, next);
    pos = next;
  }
  return pieces;
}

// One pass of a styled line; `inward` is the unit normal pointing into the field (for ticks).
void StrokeLine(cv::Mat& canvas, cv::Point2d a, cv::Point2d b, cv::Scalar colour, int thickness,
                LineStyle style, cv::Point2d inward) {
  const cv::Point2d d = b - a;
  const double length = std::hypot(d.x, d.y);
  if (length < 1e-6) return;
  const cv::Point2d u = d / length;
  for (const auto& [s0, s1] : Pattern(style, length, thickness)) {
    cv::line(canvas, a + u * s0, a + u * s1, colour, thickness, cv::LINE_AA);
  }
  if (style == LineStyle::kTicked) {  // a comb of short teeth pointing into the field
    const double spacing = 7.0 * thickness;
    for (double s = spacing / 2; s < length; s += spacing) {
      const cv::Point2d p = a + u * s;
      cv::line(canvas, p, p + inward * (3.5 * thickness), colour, thickness, cv::LINE_AA);
    }
  }
}

// A dark halo first, so the colour reads on both white and black parts of the radiograph.
void DrawStyledLine(cv::Mat& canvas, cv::Point2d a, cv::Point2d b, pal::Rgb colour, int thickness,
                    LineStyle style, cv::Point2d inward = {0, 0}) {
  StrokeLine(canvas, a, b, cv::Scalar(0, 0, 0), thickness + 2, style, inward);
  StrokeLine(canvas, a, b, ToScalar(colour), thickness, style, inward);
}

std::vector<cv::Point> ToPixels(const Polygon& polygon, double scale) {
  std::vector<cv::Point> pts;
  for (const Point2d& p : polygon) pts.emplace_back(cvRound(p.x * scale), cvRound(p.y * scale));
  return pts;
}

Polygon AnatomyBox(const ImageRecord& record) {
  if (!record.anatomy || !record.anatomy->box_px) return {};
  const auto& box = *record.anatomy->box_px;
  return Polygon(box.begin(), box.end());
}

// Field minus anatomy box: translucent tint plus diagonal hatching (readable in greyscale).
void ShadeExcess(cv::Mat& canvas, const Polygon& field, const Polygon& box, double scale,
                 int thickness) {
  cv::Mat mask = cv::Mat::zeros(canvas.size(), CV_8U);
  cv::fillPoly(mask, std::vector<std::vector<cv::Point>>{ToPixels(field, scale)}, cv::Scalar(255));
  if (box.size() >= 3) {
    cv::fillPoly(mask, std::vector<std::vector<cv::Point>>{ToPixels(box, scale)}, cv::Scalar(0));
  }
  cv::Mat tinted = canvas.clone();
  tinted.setTo(ToScalar(pal::kExcess), mask);
  cv::Mat blended;
  cv::addWeighted(canvas, 0.78, tinted, 0.22, 0.0, blended);
  const int spacing = std::max(8, 6 * thickness);
  for (int k = -canvas.rows; k < canvas.cols; k += spacing) {
    cv::line(blended, {k, 0}, {k + canvas.rows, canvas.rows}, ToScalar(pal::kExcess),
             std::max(1, thickness / 2), cv::LINE_AA);
  }
  blended.copyTo(canvas, mask);
}

struct SideEdge {
  Side side;
  cv::Point2d a, b, inward;
};

// Splits the field outline into edges named by their outward normal, as field.h names sides.
std::vector<SideEdge> EdgesBySide(const Polygon& field, double scale) {
  std::vector<SideEdge> edges;
  const double orientation = SignedArea(field) >= 0 ? 1.0 : -1.0;  // clockwise on screen: +1
  for (size_t i = 0; i < field.size(); ++i) {
    const Point2d p = field[i];
    const Point2d q = field[(i + 1) % field.size()];
    const double dx = q.x - p.x, dy = q.y - p.y;
    const double len = std::hypot(dx, dy);
    if (len < 1e-9) continue;
    const cv::Point2d outward(orientation * dy / len, -orientation * dx / len);
    Side side;
    if (std::abs(outward.x) >= std::abs(outward.y)) {
      side = outward.x < 0 ? Side::kLeft : Side::kRight;
    } else {
      side = outward.y < 0 ? Side::kTop : Side::kBottom;
    }
    edges.push_back({side, {p.x * scale, p.y * scale}, {q.x * scale, q.y * scale}, -outward});
  }
  return edges;
}

double FontScale(int width) { return std::clamp(width / 1500.0, 0.38, 1.1); }

// Text on a dark translucent plate, centred on `centre`, kept inside the canvas.
void DrawLabel(cv::Mat& canvas, const std::string& text, cv::Point2d centre, double font_scale) {
  int baseline = 0;
  const int weight = font_scale > 0.6 ? 2 : 1;
  const cv::Size size = cv::getTextSize(text, cv::FONT_HERSHEY_SIMPLEX, font_scale, weight, &baseline);
  const int pad = std::max(2, size.height / 3);
  int x = cvRound(centre.x - size.width / 2.0);
  int y = cvRound(centre.y - size.height / 2.0);
  x = std::clamp(x, pad, std::max(pad, canvas.cols - size.width - pad));
  y = std::clamp(y, pad, std::max(pad, canvas.rows - size.height - baseline - pad));
  cv::Rect plate(x - pad, y - pad, size.width + 2 * pad, size.height + baseline + 2 * pad);
  plate &= cv::Rect(0, 0, canvas.cols, canvas.rows);
  cv::Mat roi = canvas(plate);
  cv::Mat dark(roi.size(), roi.type(), cv::Scalar(15, 15, 15));
  cv::addWeighted(roi, 0.25, dark, 0.75, 0.0, roi);
  cv::putText(canvas, text, {x, y + size.height}, cv::FONT_HERSHEY_SIMPLEX, font_scale,
              cv::Scalar(255, 255, 255), weight, cv::LINE_AA);
}

std::string SideText(Side side, SideState state, bool compact) {
  if (!compact) return std::string(SideName(side)) + ": " + SideStateLabel(state);
  static constexpr const char* kShort[] = {"L", "R", "T", "B"};
  static constexpr const char* kStates[] = {"border", "no border", "clipped", "masked"};
  return std::string(kShort[static_cast<int>(side)]) + ": " + kStates[static_cast<int>(state)];
}

void DrawField(cv::Mat& canvas, const ImageRecord& record, double scale, int thickness,
               bool compact) {
  const Polygon& field = record.field->polygon_px;
  const std::vector<SideEdge> edges = EdgesBySide(field, scale);
  for (const SideEdge& e : edges) {
    const StateStyle st = StyleFor(ClassifySide(record, e.side));
    DrawStyledLine(canvas, e.a, e.b, st.colour, thickness, st.style, e.inward);
  }
  // One label per side, at the middle of its longest edge, just inside the field.
  const double font = FontScale(canvas.cols);
  for (Side side : kAllSides) {
    const SideEdge* best = nullptr;
    double best_len = 0.0;
    for (const SideEdge& e : edges) {
      const double len = cv::norm(e.b - e.a);
      if (e.side == side && len > best_len) best = &e, best_len = len;
    }
    if (best == nullptr) continue;
    const cv::Point2d mid = (best->a + best->b) * 0.5 + best->inward * (28.0 * font + 3 * thickness);
    DrawLabel(canvas, SideText(side, ClassifySide(record, side), compact), mid, font);
  }
}

struct LegendItem {
  pal::Rgb colour;
  LineStyle style;
  const char* text;
};

constexpr LegendItem kLegend[] = {
    {pal::kBorderVisible, LineStyle::kSolid, "field border visible (solid)"},
    {pal::kBorderNotVisible, LineStyle::kDashed, "no border visible (dashed)"},
    {pal::kBorderClipped, LineStyle::kTicked, "anatomy clipped (comb)"},
    {pal::kBorderNotAssessable, LineStyle::kDashDot, "masked or cropped (dash-dot)"},
    {pal::kAnatomyBox, LineStyle::kDotted, "anatomy box (dotted)"},
    {pal::kExcess, LineStyle::kSolid, "excess exposed area (hatched)"},
};

cv::Mat AddLegend(const cv::Mat& picture, const std::string& title, int thickness) {
  const double font = FontScale(picture.cols);
  const int line_h = cvRound(34 * font) + 6;
  const int columns = picture.cols >= 640 ? 2 : 1;
  const int item_rows = (static_cast<int>(std::size(kLegend)) + columns - 1) / columns;
  const int title_rows = title.empty() ? 0 : 1;
  const int strip_h = (item_rows + title_rows) * line_h + line_h / 2;
  cv::Mat out(picture.rows + strip_h, picture.cols, picture.type(), cv::Scalar(32, 34, 36));
  picture.copyTo(out(cv::Rect(0, 0, picture.cols, picture.rows)));
  const int weight = font > 0.6 ? 2 : 1;
  const int x0 = line_h / 2;
  int y = picture.rows + line_h / 4;
  if (!title.empty()) {
    cv::putText(out, title, {x0, y + cvRound(line_h * 0.7)}, cv::FONT_HERSHEY_SIMPLEX, font,
                cv::Scalar(255, 255, 255), weight, cv::LINE_AA);
    y += line_h;
  }
  const int col_w = picture.cols / columns;
  const int sample_w = std::max(28, cvRound(70 * font));
  for (size_t i = 0; i < std::size(kLegend); ++i) {
    const int col = static_cast<int>(i) / item_rows, row = static_cast<int>(i) % item_rows;
    const int cx = x0 + col * col_w, cy = y + row * line_h + line_h / 2;
    const LegendItem& item = kLegend[i];
    if (&item == &kLegend[std::size(kLegend) - 1]) {  // excess: a hatched swatch
      cv::Rect swatch(cx, cy - line_h / 3, sample_w, 2 * line_h / 3);
      cv::rectangle(out, swatch, cv::Scalar(120, 120, 110), cv::FILLED);
      for (int k = -swatch.height; k < swatch.width; k += 6) {
        cv::line(out(swatch), {k, 0}, {k + swatch.height, swatch.height}, ToScalar(item.colour), 1,
                 cv::LINE_AA);
      }
    } else {
      DrawStyledLine(out, {double(cx), double(cy)}, {double(cx + sample_w), double(cy)},
                     item.colour, thickness, item.style, {0, -1});
    }
    cv::putText(out, item.text, {cx + sample_w + 8, cy + cvRound(10 * font)},
                cv::FONT_HERSHEY_SIMPLEX, font, cv::Scalar(240, 240, 240), weight, cv::LINE_AA);
  }
  return out;
}

}  // namespace

SideState ClassifySide(const ImageRecord& record, Side side) {
  if (record.anatomy) {
    const auto& clipped = record.anatomy->clipped_sides;
    if (std::find(clipped.begin(), clipped.end(), side) != clipped.end()) return SideState::kClipped;
  }
  if (!record.field) return SideState::kNotVisible;
  const auto& hidden = record.field->blanked_or_cropped_sides;
  if (std::find(hidden.begin(), hidden.end(), side) != hidden.end()) {
    return SideState::kNotAssessable;
  }
  return record.field->side(side).visible ? SideState::kVisible : SideState::kNotVisible;
}

const char* SideStateLabel(SideState state) {
  switch (state) {
    case SideState::kVisible: return "border visible";
    case SideState::kNotVisible: return "no border visible";
    case SideState::kClipped: return "anatomy clipped";
    case SideState::kNotAssessable: return "not assessable (masked or cropped)";
  }
  return "border visible";
}

Result<RgbImage> RenderOverlay(const Image& image, bool linear, const ImageRecord& record,
                               const OverlayOptions& options) {
  if (image.empty()) return MakeError(ErrorKind::kInvalidInput, record.file, "empty image");
  if (record.rows > 0 && (record.rows != image.height() || record.columns != image.width())) {
    return MakeError(ErrorKind::kInvalidInput, record.file,
                     "the record describes a " + std::to_string(record.columns) + " x " +
                         std::to_string(record.rows) + " image, the pixels are " +
                         std::to_string(image.width()) + " x " + std::to_string(image.height()));
  }
  const int width = options.width_px > 0 ? options.width_px : image.width();
  if (width < 64 || width > 8192) {
    return MakeError(ErrorKind::kInvalidInput, record.file, "overlay width must be 64..8192 px");
  }
  const double scale = static_cast<double>(width) / image.width();
  const int height = std::max(1, cvRound(image.height() * scale));
  try {
    const Polygon region = record.field ? record.field->polygon_px : Polygon{};
    std::vector<uint8_t> grey = ApplyDisplayWindow(image, ComputeDisplayWindow(image, linear, region));
    cv::Mat grey_mat(image.height(), image.width(), CV_8U, grey.data()), resized;
    cv::resize(grey_mat, resized, {width, height}, 0, 0,
               scale < 1.0 ? cv::INTER_AREA : cv::INTER_LINEAR);
    cv::Mat canvas;
    cv::cvtColor(resized, canvas, cv::COLOR_GRAY2RGB);
    const int thickness = std::max(2, cvRound(width / 420.0));
    const Polygon box = AnatomyBox(record);
    if (record.field && record.field->polygon_px.size() >= 3) {
      ShadeExcess(canvas, record.field->polygon_px, box, scale, thickness);
    }
    for (size_t i = 0; i < box.size(); ++i) {
      const Point2d p = box[i], q = box[(i + 1) % box.size()];
      DrawStyledLine(canvas, {p.x * scale, p.y * scale}, {q.x * scale, q.y * scale},
                     pal::kAnatomyBox, thickness, LineStyle::kDotted);
    }
    if (record.field && record.field->polygon_px.size() >= 3) {
      DrawField(canvas, record, scale, thickness, options.compact_labels);
    }
    if (options.legend) canvas = AddLegend(canvas, options.title, thickness);
    RgbImage out;
    out.width = canvas.cols;
    out.height = canvas.rows;
    out.rgb.assign(canvas.data, canvas.data + canvas.total() * 3);
    return out;
  } catch (const cv::Exception& e) {
    return MakeError(ErrorKind::kInternal, record.file, std::string("overlay drawing: ") + e.what());
  }
}

}  // namespace beamtrim
