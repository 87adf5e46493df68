// Internals shared by the truth, the renderer and the header builder.
#pragma once

#include <array>
#include <string>

#include "beamtrim/synth.h"
#include "synth/model.h"

namespace beamtrim::synth_internal {

struct FieldGeometry {
  PixelWindow window;
  std::array<Point2d, 4> corners_px;  // top-left, top-right, bottom-right, bottom-left (field frame)
  std::array<Segment, 4> edges_px;    // per Side, unclipped
  Polygon unclipped;                  // clockwise
  Polygon clipped;                    // clipped to the image, clockwise
};
FieldGeometry ComputeFieldGeometry(const SynthScenario& sc);

// Unclipped geometric field area at the detector plane (mm^2), capped at 1 m^2 for "open".
double UnclippedFieldAreaMm2(const SynthScenario& sc);

// Header attributes that follow from the scenario alone (no pixel statistics).
RadiographHeader BuildHeader(const SynthScenario& sc);

// A deterministic 2.25.<decimal> UID from (seed, index, stream).
std::string MakeUid(uint64_t seed, uint64_t index, uint64_t stream);

// "synth-00042" style file stem.
std::string ImageName(const SynthScenario& sc);

}  // namespace beamtrim::synth_internal
