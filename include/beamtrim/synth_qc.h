// Synthetic QC exposures for the light-field / x-ray-field congruence check: a uniform field
// (optionally through a flat attenuator) with radio-opaque markers laid at a light field that is
// offset from the x-ray field by known amounts per edge, with known SID, penumbra, noise and heel
// effect, written as raw linear or processed pixels. The truth is exact by construction.
// Pure functions of the spec (seeded noise); thread-safe; results are owned by the caller.
#pragma once

#include <array>
#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

#include "beamtrim/field.h"
#include "beamtrim/geometry.h"
#include "beamtrim/image.h"
#include "beamtrim/status.h"

namespace beamtrim {

enum class QcMarkerKind {
  kCoin,  // a disc, uniform thickness
  kClip,  // a small bent rod: a U with its two legs along the edge
  kWire,  // a straight rod laid along the edge
};
const char* QcMarkerKindName(QcMarkerKind kind);

enum class QcMarkerLayout {
  kEdges,    // one marker centred on each light-field edge (its centre line on the edge)
  kCorners,  // one coin centred on each light-field corner
};

struct QcExposureSpec {
  int width = 1400;          // columns
  int height = 1720;         // rows
  double pixel_mm = 0.25;    // detector-plane spacing, square pixels
  double sid_mm = 1000.0;
  // X-ray field edges: outward distance in mm from the receptor centre, indexed by Side.
  std::array<double, 4> xray_mm = {150.0, 150.0, 180.0, 180.0};
  // Misalignment per edge, x-ray minus light, outward positive (so light = x-ray - offset).
  std::array<double, 4> offset_mm = {0.0, 0.0, 0.0, 0.0};
  QcMarkerLayout layout = QcMarkerLayout::kEdges;
  QcMarkerKind kind = QcMarkerKind::kCoin;
  std::array<bool, 4> marker_present = {true, true, true, true};  // kEdges only
  double coin_diameter_mm = 20.0;
  double rod_diameter_mm = 1.0;       // clip and wire
  double marker_mu_per_mm = 1.5;      // linear attenuation of the metal (steel, copper ~60 keV)
  double coin_thickness_mm = 1.5;
  double penumbra_mm = 2.0;           // 10-90 % width of the blade shadow
  double blocked_fraction = 0.06;     // signal behind the blades / open field (scatter, leakage)
  double phantom_transmission = 1.0;  // flat attenuator over the whole receptor (1 = none)
  double heel = 0.10;                 // relative signal change from top to bottom row
  double noise_rel = 0.01;            // relative noise (Poisson-like) in the open field
  double open_level = 12000.0;        // raw value in the open field before the phantom
  bool linear_raw = true;             // false: log-processed presentation output
  uint64_t seed = 1;
};

struct QcExposureTruth {
  std::array<double, 4> xray_mm{};    // geometric blade projections (50 % of the linear step)
  std::array<double, 4> light_mm{};   // light-field edges, outward from the receptor centre
  std::array<double, 4> offset_mm{};  // x-ray minus light
  std::vector<Point2d> marker_centres_px;  // where each rendered marker is centred
  std::array<bool, 4> edge_has_marker{};
};

struct QcExposure {
  Image image;  // larger = more radiation
  bool linear = true;
  double pixel_mm = 0.25;
  double sid_mm = 1000.0;
  QcExposureTruth truth;
};

QcExposure MakeQcExposure(const QcExposureSpec& spec);

// A varied spec drawn deterministically from (seed, index): SID 1000 / 1150 / 1800 mm, field
// size and position, offsets per edge up to +-15 mm, marker kind and layout, penumbra, noise,
// heel, flat attenuator, raw or processed (about one in four).
QcExposureSpec DrawQcExposureSpec(uint64_t seed, int index);

// Where the edge lies, outward from the receptor centre in mm, under an edge definition applied
// to the noise-free image of `spec` (the geometric edge moved by the penumbra model).
double QcTruthEdgeMm(const QcExposureSpec& spec, Side side, EdgeDefinition definition);

// Pixel coordinates of an outward distance from the receptor centre on a side.
double QcEdgeToPixel(const QcExposureSpec& spec, Side side, double outward_mm);

// Writes the exposure as a DX DICOM file (raw: FOR PROCESSING, LIN; processed: FOR
// PRESENTATION) with SID, imager pixel spacing, station name and date. Errors name the file.
struct QcDicomInfo {
  std::string station = "XR-ROOM-2";
  std::string date = "20260105";  // YYYYMMDD
  bool write_sid = true;
  bool declare_collimator = false;  // write the x-ray edges as Collimator edges (0018,1702..8)
};
Status WriteQcExposureDicom(const QcExposure& exposure, const QcExposureSpec& spec,
                            const QcDicomInfo& info, const std::filesystem::path& file);

}  // namespace beamtrim
