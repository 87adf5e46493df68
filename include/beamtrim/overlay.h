// Overlays: a radiograph windowed for viewing with the measurement drawn on it (field border
// per side, anatomy box, excess area, side labels, legend), as an RGB raster or a PNG. The same
// drawing makes the `beamtrim overlay` picture and the thumbnails in reports (docs/report.md).
// Pure functions of their arguments: thread-safe; results are value types owned by the caller.
#pragma once

#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

#include "beamtrim/field.h"
#include "beamtrim/geometry.h"
#include "beamtrim/image.h"
#include "beamtrim/record.h"
#include "beamtrim/status.h"

namespace beamtrim {

// Grey-level window: values at or below `low` show white, at or above `high` black, because a
// radiograph reads with more radiation darker (anatomy light on a dark background).
struct DisplayWindow {
  double low = 0.0;
  double high = 1.0;
  bool log_domain = false;  // the window applies to log(value)
};

// Robust window from percentiles of the pixels inside `region` (the whole image when empty).
// Linear (raw) pixels are windowed in the log domain; processed pixels are already logarithmic
// and are used as they are. Percentiles in 0..100, low < high.
DisplayWindow ComputeDisplayWindow(const Image& image, bool linear, const Polygon& region = {},
                                   double low_percentile = 1.0, double high_percentile = 99.0);

// 8-bit grey image, row-major, one byte per pixel, 255 = white (little radiation).
std::vector<uint8_t> ApplyDisplayWindow(const Image& image, const DisplayWindow& window);

// How one side of the field is shown, from the record: the anatomy runs into the edge
// (clipped), the edge is hidden by masking or cropping (not assessable), a blade shadow was
// found (visible), or none was found (not visible).
enum class SideState { kVisible, kNotVisible, kClipped, kNotAssessable };
SideState ClassifySide(const ImageRecord& record, Side side);
const char* SideStateLabel(SideState state);  // "border visible", "no border visible", ...

struct OverlayOptions {
  int width_px = 0;          // output width; 0 = the image's own width. Height keeps the aspect.
  bool legend = true;        // a legend strip below the image
  bool compact_labels = false;  // short side labels, for thumbnails
  std::string title;         // first legend line, e.g. the case id (never a patient identifier)
};

// RGB raster, 3 bytes per pixel, row-major.
struct RgbImage {
  int width = 0;
  int height = 0;
  std::vector<uint8_t> rgb;
};

// Draws the record's measurement over the windowed image. The record must describe this
// image (same rows and columns); parts the record lacks are simply not drawn. Errors:
// kInvalidInput for an empty image, a size mismatch or an impossible width.
Result<RgbImage> RenderOverlay(const Image& image, bool linear, const ImageRecord& record,
                               const OverlayOptions& options = {});

// PNG bytes of an RGB raster (kInternal if the encoder fails).
Result<std::vector<uint8_t>> EncodePng(const RgbImage& image);

// Writes PNG bytes to a file; errors name the file.
Status WriteFileBytes(const std::filesystem::path& file, const std::vector<uint8_t>& bytes);

// Standard base64 (RFC 4648, section 4) with padding.
std::string Base64Encode(const std::vector<uint8_t>& bytes);

}  // namespace beamtrim
