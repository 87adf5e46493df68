// Internals of the QC analysis shared by its source files: the working images (log domain,
// marker-free background) and the x-ray field edge finder. Not a public API.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include <opencv2/core.hpp>

#include "beamtrim/qc.h"

namespace beamtrim::qc_internal {

// Images derived once from the exposure and shared by marker and edge finding.
struct WorkingImages {
  cv::Mat native;      // CV_32F, the pixels as read (larger = more radiation)
  cv::Mat log_smooth;  // CV_32F, log signal (linear input) or the processed value, smoothed
  cv::Mat background;  // CV_32F, grey-level closing of log_smooth: the image without markers
  cv::Mat depth;       // CV_32F, background - log_smooth (>= 0): how far below its surroundings
  double field_contrast = 0.0;  // open minus blocked level of `background`
  double open_level = 0.0;      // of `background`
  double blocked_level = 0.0;   // of `background`
  double depth_noise = 0.0;     // robust spread of `depth` away from markers
  double depth_floor = 0.0;     // median of `depth`: the closing's upward bias from noise
};

WorkingImages MakeWorkingImages(const Image& image, bool linear, std::array<double, 2> spacing_mm,
                                const QcMarkerOptions& options);

std::vector<QcMarker> FindMarkersIn(const WorkingImages& work, std::array<double, 2> spacing_mm,
                                    const QcMarkerOptions& options);

// The x-ray field found on the image: coarse box, then one fitted line per side.
// Lines are kept as position = a + b * along, where position is x (left/right sides) or y
// (top/bottom) in continuous pixel coordinates and along is the other coordinate.
struct EdgeFit {
  bool found = false;
  double a = 0.0;
  double b = 0.0;
  double open_level = 0.0;     // native units, median over the edge's bins
  double blocked_level = 0.0;
  int bins_used = 0;
  std::string reason;          // why not found
  double At(double along) const { return a + b * along; }
};

struct FieldEdges {
  bool found = false;
  std::string reason;
  double rotation_deg = 0.0;
  std::array<double, 4> coarse{};   // left x, right x, top y, bottom y (pixels)
  std::array<EdgeFit, 4> fits;      // indexed by Side
  EdgeDefinition definition = EdgeDefinition::kHalfTransition;
  std::vector<std::string> notes;
};

// Finds the field on the marker-free background, then fits each edge on the native pixels
// with profiles that avoid the markers, under the definition the image allows.
FieldEdges FindFieldEdges(const WorkingImages& work, bool linear,
                          std::array<double, 2> spacing_mm, const std::vector<QcMarker>& markers,
                          const QcOptions& options);

}  // namespace beamtrim::qc_internal
