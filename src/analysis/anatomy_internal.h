// Internals of the anatomy search (anatomy*.cpp): the working image and the segmentation.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include <opencv2/core.hpp>

#include "beamtrim/anatomy.h"

namespace beamtrim::anatomy_internal {

// The image reduced to about AnatomyOptions::working_pixel_mm, in the log domain.
struct Working {
  cv::Mat log;          // CV_32F, log of exposure (or the stored scale when not linear)
  cv::Mat field;        // CV_8U, field eroded past the penumbra
  double fx = 1.0;      // full-resolution pixels per working pixel, x
  double fy = 1.0;      // same, y
  double erosion_px = 0.0;  // working pixels removed inside the field edge
  bool linear = false;      // log of a linear image: levels are physical
};

// The direct-exposure model: a smooth surface over the direct-exposure level, so that
// R = surface - log is the attenuation (0 in direct exposure, > 0 through the patient).
struct Segmentation {
  bool direct_found = false;
  cv::Mat residual;     // CV_32F, R at working resolution (valid inside `field`)
  cv::Mat anatomy;      // CV_8U, anatomy after markers and shields are removed
  cv::Mat metal;        // CV_8U, metal that is not anatomy (markers, shields)
  cv::Mat direct;       // CV_8U, direct exposure
  std::array<double, 6> surface{};  // quadratic in working pixel coordinates
  // Local direct-exposure level (CV_32F, working resolution) when direct exposure was found:
  // follows the smooth shading that image processing adds to the open field; empty otherwise.
  cv::Mat background;
  double threshold = 0.0;   // R above which a pixel is tissue
  double noise = 0.0;       // robust sigma of R in direct exposure, working resolution
  double tissue_level = 0.0;  // median R of the tissue class
  int markers_removed = 0;
  double step = 0.0;        // border step of the best direct-exposure candidate, noise units
};

Working MakeWorking(const Image& image, const FieldMeasurement& field,
                    const std::array<double, 2>& spacing, bool linear, double working_mm);

Segmentation Segment(const Working& w, const std::array<double, 2>& spacing, double working_mm);

double SurfaceAt(const std::array<double, 6>& q, double x, double y);

// Direct-exposure level at working-pixel coordinates (x, y): the local background,
// interpolated bilinearly, or the plane when there is none.
double LevelAt(const Segmentation& s, double x, double y);

// Log-domain value used for both resolutions.
inline float ToLog(float v, bool linear) {
  return linear ? std::log(std::max(v, 1e-3f)) : v;
}

}  // namespace beamtrim::anatomy_internal
