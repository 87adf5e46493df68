// Physicist QC of a beam-limiting device from one test exposure: the x-ray field edges, the
// radio-opaque markers laid at the light-field edges or corners, light-field / x-ray-field
// congruence, field centre and indicated size against 2 % of SID (21 CFR 1020.31), the QC record
// in the store (room history) and a one-page HTML report (docs/qc.md).
// Every function is thread-safe (no shared state); results are value types owned by the caller.
#pragma once

#include <array>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "beamtrim/dicom.h"
#include "beamtrim/field.h"
#include "beamtrim/geometry.h"
#include "beamtrim/image.h"
#include "beamtrim/status.h"

namespace beamtrim {

// ---- The 2 % of SID arithmetic (21 CFR 1020.31(d) and (e)) -------------------------------

// 2 % of SID in mm: the limit for the misalignment sum per axis, the centre and the size.
double TwoPercentOfSidMm(double sid_mm);
double PercentOfSid(double mm, double sid_mm);

// One pass/fail line of the QC table. Without SID only the mm value is given (no verdict).
struct QcCheck {
  std::string name;                 // "left + right misalignment", "field centre", ...
  std::optional<double> value_mm;   // empty when not assessed
  std::optional<double> value_pct_sid;
  std::optional<double> limit_mm;   // 2 % of SID when SID is known
  std::optional<bool> pass;         // empty: not assessed or no SID
  std::string note;                 // why not assessed, or what was assumed
};

// Sum of the magnitudes of the two opposite edges' misalignments of one axis against 2 % of
// SID. A missing edge makes the axis "not assessed"; a missing SID gives mm only.
QcCheck CheckOppositeEdges(const std::string& name, std::optional<double> first_mm,
                           std::optional<double> second_mm, std::optional<double> sid_mm);

// A single distance (centre offset, size difference) against 2 % of SID.
QcCheck CheckAgainstTwoPercent(const std::string& name, std::optional<double> value_mm,
                               std::optional<double> sid_mm);

// ---- Markers ----------------------------------------------------------------------------

enum class QcMarkerPlacement { kEdge, kCorner, kInterior };
const char* QcMarkerPlacementName(QcMarkerPlacement placement);

struct QcMarker {
  Point2d centre_px;              // attenuation-weighted centroid
  double area_mm2 = 0.0;
  double length_mm = 0.0;         // extent along the principal axis
  double width_mm = 0.0;          // extent across it
  bool elongated = false;         // a wire or rod rather than a coin or clip
  double attenuation = 0.0;       // mean -ln(transmission) over the marker (linear images)
  QcMarkerPlacement placement = QcMarkerPlacement::kInterior;
  std::vector<Side> sides;        // edge: one side; corner: the two sides it marks
  bool straddles_edge = false;    // part inside and part outside the x-ray field
  std::vector<Point2d> outline_px;  // convex hull, for drawing
};

struct QcMarkerOptions {
  // Smallest and largest marker, mm^2 at the detector plane.
  double min_area_mm2 = 1.5;
  double max_area_mm2 = 2500.0;
  // Background estimate: grey-level closing with a square larger than any marker: at least
  // this wide, and widened to this fraction of the field's shorter side (a wire laid along an
  // edge must be shorter than the window), at most the maximum.
  double background_window_mm = 40.0;
  double window_field_fraction = 0.8;
  double max_background_window_mm = 250.0;
  // A pixel is marker when its log signal lies this far below the background, as a fraction
  // of the field contrast (open vs blocked, log domain).
  double relative_threshold = 0.12;
};

// ---- The QC analysis --------------------------------------------------------------------

// Per-side result. Positions are outward distances from the receptor (image) centre, in mm at
// the detector plane; misalignment is x-ray minus light, positive when the x-ray field reaches
// beyond the light field.
struct QcEdge {
  Side side = Side::kLeft;
  std::optional<double> xray_mm;
  std::optional<Line> xray_line_px;   // the fitted x-ray edge
  std::optional<double> light_mm;
  std::string light_source;           // "markers", "corner markers", "command line", ""
  std::optional<double> misalignment_mm;
  std::optional<double> misalignment_pct_sid;
  std::optional<double> declared_mm;            // header collimator edge, same convention
  std::optional<double> declared_deviation_mm;  // x-ray minus declared
  std::string note;                   // why an edge or the light edge is not assessed
};

struct QcInputs {
  // Light-field edges measured with a ruler: outward distances in mm from the receptor centre
  // at the detector plane, indexed by Side. Used instead of markers for those edges.
  std::optional<std::array<double, 4>> light_field_mm;
  // Field size indicated on the collimator, mm at the receptor plane: [width (columns),
  // height (rows)].
  std::optional<std::array<double, 2>> indicated_size_mm;
  std::optional<double> sid_mm;       // used when the header has no SID
  std::optional<double> pixel_mm;     // used when the header has no pixel spacing
};

// What the header says that the analysis needs.
struct QcImageInfo {
  std::optional<std::array<double, 2>> spacing_mm;  // [row, column], detector plane
  bool linear = false;
  std::optional<double> sid_mm;
  std::optional<DeclaredEdges> collimator_edges;    // pixel coordinates
  std::string station;
  std::string date;  // YYYYMMDD
  std::string file;
};
QcImageInfo QcInfoFromRadiograph(const Radiograph& radiograph);

struct QcOptions {
  QcMarkerOptions markers;
  // Largest field rotation accepted; QC exposures are made with the collimator at 0 degrees.
  double max_rotation_deg = 5.0;
};

struct QcResult {
  std::string station;     // room
  std::string date;        // YYYYMMDD of the exposure
  std::string image_file;
  int width = 0;
  int height = 0;
  std::array<double, 2> spacing_mm{};  // [row, column]
  bool linear = false;
  EdgeDefinition edge_definition = EdgeDefinition::kHalfTransition;
  std::optional<double> sid_mm;
  std::string sid_source;  // "header", "command line", ""
  std::array<QcEdge, 4> edges;  // indexed by Side
  std::vector<QcMarker> markers;
  QcCheck width_axis;      // left + right misalignment
  QcCheck length_axis;     // top + bottom misalignment
  QcCheck centre;          // x-ray field centre vs receptor centre
  QcCheck size_width;      // x-ray field width vs indicated
  QcCheck size_height;     // x-ray field height vs indicated
  std::string overall;     // "pass", "fail", "incomplete"
  std::vector<std::string> notes;

  const QcEdge& edge(Side s) const { return edges[static_cast<int>(s)]; }
  QcEdge& edge(Side s) { return edges[static_cast<int>(s)]; }
};

// Finds the markers on an image (any placement). `spacing_mm` [row, column].
std::vector<QcMarker> FindQcMarkers(const Image& image, bool linear,
                                    std::array<double, 2> spacing_mm,
                                    const QcMarkerOptions& options = {});

// The whole analysis on pixels. Errors (kInvalidInput) when the pixel spacing is unknown, the
// image is empty, or no x-ray field can be found.
Result<QcResult> AnalyseQcExposure(const Image& image, const QcImageInfo& info,
                                   const QcInputs& inputs, const QcOptions& options = {});

// Reads the DICOM file and analyses it. Errors name the file.
struct QcFileResult {
  QcResult result;
  Radiograph radiograph;
};
Result<QcFileResult> AnalyseQcFile(const std::filesystem::path& file, const QcInputs& inputs,
                                   const QcOptions& options = {});

// ---- Output -----------------------------------------------------------------------------

nlohmann::json QcToJson(const QcResult& result);
// Plain-text table for the terminal.
std::string QcToText(const QcResult& result);

// The QC record as the store keeps it: one row per QC exposure, per room and date.
struct QcHistoryRow {
  int64_t id = 0;
  std::string station;
  std::string date;  // YYYYMMDD
  std::string overall;
  std::optional<double> sid_mm;
  std::optional<double> width_sum_mm;
  std::optional<double> length_sum_mm;
  std::optional<double> centre_mm;
  std::string result_json;
};

// Stores the result in the audit store file (created if absent). Errors name the file.
Result<int64_t> SaveQcRecord(const std::filesystem::path& store_file, const QcResult& result);
// QC records, oldest first; `station` empty = every room.
Result<std::vector<QcHistoryRow>> LoadQcHistory(const std::filesystem::path& store_file,
                                                const std::string& station = {});

// One-page self-contained HTML: the overlay of edges and markers on the windowed image, the
// pass/fail table, the room's QC history and the cautions.
Result<std::string> RenderQcReportHtml(const QcResult& result, const Image& image,
                                       const std::vector<QcHistoryRow>& history);

}  // namespace beamtrim
