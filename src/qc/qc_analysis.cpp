// The QC analysis: x-ray field edges and markers from the image, light-field edges from the
// markers (or the command line), then the misalignment per edge and the 2 % of SID checks.
#include <algorithm>
#include <cmath>
#include <exception>
#include <sstream>

#include <opencv2/core.hpp>

#include "qc/qc_internal.h"

namespace beamtrim {
namespace {

using qc_internal::EdgeFit;
using qc_internal::FieldEdges;

constexpr double kNearEdge = 0.7;   // |normalised coordinate| above this: near an edge
constexpr double kFarOut = 1.6;     // above this: too far outside the field to be a marker of it

bool IsVertical(Side side) { return side == Side::kLeft || side == Side::kRight; }

// Outward distance in mm from the receptor centre of a point, for a side.
double OutwardMm(Side side, Point2d p, int width, int height, std::array<double, 2> spacing) {
  switch (side) {
    case Side::kLeft: return (0.5 * width - p.x) * spacing[1];
    case Side::kRight: return (p.x - 0.5 * width) * spacing[1];
    case Side::kTop: return (0.5 * height - p.y) * spacing[0];
    case Side::kBottom: return (p.y - 0.5 * height) * spacing[0];
  }
  return 0.0;
}

// The x-ray edge position in pixels at the given point's along-coordinate.
double EdgeAt(const EdgeFit& fit, Side side, Point2d p) {
  return fit.At(IsVertical(side) ? p.y : p.x);
}

Point2d OnEdge(const EdgeFit& fit, Side side, Point2d p) {
  double pos = EdgeAt(fit, side, p);
  return IsVertical(side) ? Point2d{pos, p.y} : Point2d{p.x, pos};
}

Line ToLine(const EdgeFit& fit, Side side, int width, int height) {
  if (IsVertical(side)) return LineThrough({fit.At(0.0), 0.0}, {fit.At(height), double(height)});
  return LineThrough({0.0, fit.At(0.0)}, {double(width), fit.At(width)});
}

// A disc over a field corner: the part inside the field is lost in the background estimate
// (the dark region beyond both blades wraps around it), so the depth-weighted centroid is
// pulled outward. The outline's vertices still lie on the disc's rim: fit a circle to them
// (algebraic least squares, then once more without the vertices more than a pixel off).
bool FitCircle(const std::vector<Point2d>& points, Point2d* centre, double* radius) {
  std::vector<Point2d> used = points;
  for (int round = 0; round < 2; ++round) {
    if (used.size() < 6) return false;
    cv::Mat a(static_cast<int>(used.size()), 3, CV_64F), b(static_cast<int>(used.size()), 1, CV_64F);
    for (size_t i = 0; i < used.size(); ++i) {
      a.at<double>(i, 0) = used[i].x;
      a.at<double>(i, 1) = used[i].y;
      a.at<double>(i, 2) = 1.0;
      b.at<double>(i, 0) = -(used[i].x * used[i].x + used[i].y * used[i].y);
    }
    cv::Mat x;
    if (!cv::solve(a, b, x, cv::DECOMP_SVD)) return false;
    centre->x = -0.5 * x.at<double>(0);
    centre->y = -0.5 * x.at<double>(1);
    double r2 = centre->x * centre->x + centre->y * centre->y - x.at<double>(2);
    if (r2 <= 0.0) return false;
    *radius = std::sqrt(r2);
    std::vector<Point2d> kept;
    for (const Point2d& p : used) {
      if (std::fabs(std::hypot(p.x - centre->x, p.y - centre->y) - *radius) <= 1.0) kept.push_back(p);
    }
    if (kept.size() == used.size()) break;
    used = std::move(kept);
  }
  return true;
}

void RefineCornerMarker(QcMarker* m) {
  Point2d centre;
  double radius = 0.0;
  if (!FitCircle(m->outline_px, &centre, &radius)) return;
  // Only a disc: most outline vertices must lie on the fitted rim.
  int on_rim = 0;
  for (const Point2d& p : m->outline_px) {
    if (std::fabs(std::hypot(p.x - centre.x, p.y - centre.y) - radius) <= 1.0) ++on_rim;
  }
  if (radius < 2.0 || on_rim < 0.7 * m->outline_px.size()) return;
  m->centre_px = centre;
}

void ClassifyMarkers(const FieldEdges& field, std::vector<QcMarker>* markers) {
  double cx = 0.5 * (field.coarse[0] + field.coarse[1]), cy = 0.5 * (field.coarse[2] + field.coarse[3]);
  double hw = 0.5 * (field.coarse[1] - field.coarse[0]), hh = 0.5 * (field.coarse[3] - field.coarse[2]);
  for (QcMarker& m : *markers) {
    double u = (m.centre_px.x - cx) / hw, v = (m.centre_px.y - cy) / hh;
    bool near_x = std::fabs(u) > kNearEdge && std::fabs(u) < kFarOut;
    bool near_y = std::fabs(v) > kNearEdge && std::fabs(v) < kFarOut;
    Side sx = u < 0 ? Side::kLeft : Side::kRight, sy = v < 0 ? Side::kTop : Side::kBottom;
    if (near_x && near_y && !m.elongated) {
      m.placement = QcMarkerPlacement::kCorner;
      m.sides = {sx, sy};
      RefineCornerMarker(&m);
    } else if (near_x && std::fabs(v) <= kNearEdge) {
      m.placement = QcMarkerPlacement::kEdge;
      m.sides = {sx};
    } else if (near_y && std::fabs(u) <= kNearEdge) {
      m.placement = QcMarkerPlacement::kEdge;
      m.sides = {sy};
    }
    bool inside = false, outside = false;
    for (const Point2d& p : m.outline_px) {
      bool in = p.x > field.coarse[0] && p.x < field.coarse[1] && p.y > field.coarse[2] && p.y < field.coarse[3];
      (in ? inside : outside) = true;
    }
    m.straddles_edge = inside && outside;
  }
}

// Light-field edge of one side from its markers: edge markers count on their own, corner
// markers only in pairs (two corners define the edge line; one would need an assumption).
void LightFromMarkers(const std::vector<QcMarker>& markers, const EdgeFit& fit, Side side,
                      int width, int height, std::array<double, 2> spacing, QcEdge* edge) {
  std::vector<const QcMarker*> edge_markers, corner_markers;
  for (const QcMarker& m : markers) {
    if (std::find(m.sides.begin(), m.sides.end(), side) == m.sides.end()) continue;
    (m.placement == QcMarkerPlacement::kEdge ? edge_markers : corner_markers).push_back(&m);
  }
  // One marker per corner: a disc over a corner can leave a fragment beside it; keep the
  // largest piece at each end of the side.
  std::vector<const QcMarker*> ends(2, nullptr);
  for (const QcMarker* m : corner_markers) {
    Side other = m->sides[0] == side ? m->sides[1] : m->sides[0];
    int end = (other == Side::kLeft || other == Side::kTop) ? 0 : 1;
    if (!ends[end] || m->area_mm2 > ends[end]->area_mm2) ends[end] = m;
  }
  corner_markers.clear();
  for (const QcMarker* m : ends) if (m) corner_markers.push_back(m);
  std::vector<const QcMarker*> used = edge_markers;
  if (corner_markers.size() >= 2) used.insert(used.end(), corner_markers.begin(), corner_markers.end());
  if (used.empty()) {
    edge->note = corner_markers.size() == 1
                    ? std::string("only one corner marker on the ") + SideName(side) +
                          " side: two corners are needed to place the light edge; not assessed"
                    : std::string("no marker found at the ") + SideName(side) +
                          " edge of the x-ray field: light edge not assessed";
    return;
  }
  double light = 0.0, mis = 0.0;
  for (const QcMarker* m : used) {
    double marker_mm = OutwardMm(side, m->centre_px, width, height, spacing);
    double xray_mm = OutwardMm(side, OnEdge(fit, side, m->centre_px), width, height, spacing);
    light += marker_mm / used.size();
    mis += (xray_mm - marker_mm) / used.size();
  }
  edge->light_mm = light;
  edge->misalignment_mm = mis;
  edge->light_source = edge_markers.empty() ? "corner markers" : "markers";
}

void FillEdges(const FieldEdges& field, const std::vector<QcMarker>& markers,
               const QcImageInfo& info, const QcInputs& inputs, QcResult* r) {
  for (Side side : kAllSides) {
    QcEdge& edge = r->edge(side);
    edge.side = side;
    const EdgeFit& fit = field.fits[static_cast<int>(side)];
    if (!fit.found) {
      edge.note = std::string("x-ray edge not found on the ") + SideName(side) + " side: " + fit.reason;
      continue;
    }
    Point2d mid{0.5 * (field.coarse[0] + field.coarse[1]), 0.5 * (field.coarse[2] + field.coarse[3])};
    edge.xray_mm = OutwardMm(side, OnEdge(fit, side, mid), r->width, r->height, r->spacing_mm);
    edge.xray_line_px = ToLine(fit, side, r->width, r->height);
    if (inputs.light_field_mm) {
      edge.light_mm = (*inputs.light_field_mm)[static_cast<int>(side)];
      edge.misalignment_mm = *edge.xray_mm - *edge.light_mm;
      edge.light_source = "command line";
    } else {
      LightFromMarkers(markers, fit, side, r->width, r->height, r->spacing_mm, &edge);
    }
    if (edge.misalignment_mm && r->sid_mm) {
      edge.misalignment_pct_sid = PercentOfSid(*edge.misalignment_mm, *r->sid_mm);
    }
    if (info.collimator_edges) {
      const DeclaredEdges& d = *info.collimator_edges;
      double px[4] = {d.left, d.right, d.upper, d.lower};
      double pos = px[static_cast<int>(side)];
      Point2d p = IsVertical(side) ? Point2d{pos, mid.y} : Point2d{mid.x, pos};
      edge.declared_mm = OutwardMm(side, p, r->width, r->height, r->spacing_mm);
      edge.declared_deviation_mm = *edge.xray_mm - *edge.declared_mm;
    }
  }
}

void FillChecks(const QcInputs& inputs, QcResult* r) {
  const QcEdge& l = r->edge(Side::kLeft);
  const QcEdge& ri = r->edge(Side::kRight);
  const QcEdge& t = r->edge(Side::kTop);
  const QcEdge& b = r->edge(Side::kBottom);
  r->width_axis = CheckOppositeEdges("left + right misalignment (width)", l.misalignment_mm,
                                     ri.misalignment_mm, r->sid_mm);
  r->length_axis = CheckOppositeEdges("top + bottom misalignment (length)", t.misalignment_mm,
                                      b.misalignment_mm, r->sid_mm);
  std::optional<double> centre;
  if (l.xray_mm && ri.xray_mm && t.xray_mm && b.xray_mm) {
    double dx = 0.5 * (*ri.xray_mm - *l.xray_mm), dy = 0.5 * (*b.xray_mm - *t.xray_mm);
    centre = std::hypot(dx, dy);
  }
  r->centre = CheckAgainstTwoPercent("x-ray field centre vs receptor centre", centre, r->sid_mm);
  if (!centre) r->centre.note = "not assessed: an x-ray edge is missing";
  r->size_width.name = "field width vs indicated";
  r->size_height.name = "field height vs indicated";
  if (!inputs.indicated_size_mm) {
    r->size_width.note = r->size_height.note = "no indicated size given (--indicated-size)";
  } else {
    std::optional<double> dw, dh;
    if (l.xray_mm && ri.xray_mm) dw = std::fabs(*l.xray_mm + *ri.xray_mm - (*inputs.indicated_size_mm)[0]);
    if (t.xray_mm && b.xray_mm) dh = std::fabs(*t.xray_mm + *b.xray_mm - (*inputs.indicated_size_mm)[1]);
    r->size_width = CheckAgainstTwoPercent(r->size_width.name, dw, r->sid_mm);
    r->size_height = CheckAgainstTwoPercent(r->size_height.name, dh, r->sid_mm);
  }
}

std::string Overall(const QcResult& r) {
  const QcCheck* checks[] = {&r.width_axis, &r.length_axis, &r.centre, &r.size_width, &r.size_height};
  for (const QcCheck* c : checks) if (c->pass && !*c->pass) return "fail";
  if (!r.width_axis.pass || !r.length_axis.pass || !r.centre.pass) return "incomplete";
  return "pass";
}

}  // namespace

QcImageInfo QcInfoFromRadiograph(const Radiograph& radiograph) {
  const RadiographHeader& h = radiograph.header;
  QcImageInfo info;
  info.spacing_mm = h.DetectorSpacing();
  info.linear = radiograph.linear;
  info.sid_mm = h.distance_source_to_detector_mm;
  info.collimator_edges = h.collimator_edges;
  info.station = h.station_name;
  info.date = !h.study_date.empty() ? h.study_date : !h.acquisition_date.empty() ? h.acquisition_date : h.content_date;
  info.file = radiograph.file.string();
  return info;
}

Result<QcResult> AnalyseQcExposure(const Image& image, const QcImageInfo& info,
                                   const QcInputs& inputs, const QcOptions& options) {
  if (image.empty()) return MakeError(ErrorKind::kInvalidInput, info.file, "the image has no pixels");
  QcResult r;
  r.station = info.station;
  r.date = info.date;
  r.image_file = info.file;
  r.width = image.width();
  r.height = image.height();
  r.linear = info.linear;
  if (info.spacing_mm) {
    r.spacing_mm = *info.spacing_mm;
  } else if (inputs.pixel_mm && *inputs.pixel_mm > 0.0) {
    r.spacing_mm = {*inputs.pixel_mm, *inputs.pixel_mm};
    r.notes.push_back("pixel spacing from the command line (the header has none)");
  } else {
    return MakeError(ErrorKind::kInvalidInput, info.file,
                     "no pixel spacing in the header: give the detector pixel size with --pixel-mm",
                     "(0018,1164) Imager Pixel Spacing");
  }
  if (info.sid_mm && *info.sid_mm > 0.0) {
    r.sid_mm = info.sid_mm;
    r.sid_source = "header";
    if (inputs.sid_mm && std::fabs(*inputs.sid_mm - *info.sid_mm) > 1.0) {
      r.notes.push_back("the header's SID is used; the SID given on the command line differs");
    }
  } else if (inputs.sid_mm && *inputs.sid_mm > 0.0) {
    r.sid_mm = inputs.sid_mm;
    r.sid_source = "command line";
  } else {
    r.notes.push_back("SID unknown (not in the header, no --sid-mm): results in mm only, no pass/fail");
  }

  qc_internal::WorkingImages work =
      qc_internal::MakeWorkingImages(image, info.linear, r.spacing_mm, options.markers);
  std::vector<QcMarker> markers = qc_internal::FindMarkersIn(work, r.spacing_mm, options.markers);
  FieldEdges field = qc_internal::FindFieldEdges(work, info.linear, r.spacing_mm, markers, options);
  if (!field.found) return MakeError(ErrorKind::kInvalidInput, info.file, field.reason);
  r.edge_definition = field.definition;
  r.notes.insert(r.notes.end(), field.notes.begin(), field.notes.end());
  ClassifyMarkers(field, &markers);
  r.markers = std::move(markers);
  if (inputs.light_field_mm) {
    r.notes.push_back("light-field edges from the command line (ruler measurement from the receptor centre)");
  }
  FillEdges(field, r.markers, info, inputs, &r);
  FillChecks(inputs, &r);
  r.overall = Overall(r);
  return r;
}

Result<QcFileResult> AnalyseQcFile(const std::filesystem::path& file, const QcInputs& inputs,
                                   const QcOptions& options) {
  try {
    Result<Radiograph> radiograph = ReadRadiograph(file);
    if (!radiograph.ok()) return radiograph.error();
    QcImageInfo info = QcInfoFromRadiograph(radiograph.value());
    Result<QcResult> result = AnalyseQcExposure(radiograph->pixels, info, inputs, options);
    if (!result.ok()) return result.error();
    QcFileResult out{std::move(result.value()), std::move(radiograph.value())};
    out.result.notes.insert(out.result.notes.end(), out.radiograph.notes.begin(), out.radiograph.notes.end());
    return out;
  } catch (const std::exception& e) {
    return MakeError(ErrorKind::kInternal, file.string(), std::string("internal error: ") + e.what());
  }
}

}  // namespace beamtrim
