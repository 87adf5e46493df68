// Rendering internals of the synthetic radiographs (see render.cpp). Thread-safe functions.
#pragma once

#include <random>

#include "beamtrim/image.h"
#include "beamtrim/synth.h"
#include "synth/model.h"
#include "synth/phantom.h"

namespace beamtrim::synth_internal {

struct ExposureMaps {
  Image primary;  // uGy at the detector, receptor grid
  Image scatter;  // uGy
  Image tissue;   // patient thickness along the ray, mm (for exposure index and windowing)
};

// Shadow of one blade edge: transmission at `inside_mm` (signed distance from the geometric
// edge, positive inside the field) for a uniform focal spot whose projected width is
// `penumbra_mm`, averaged over a detector aperture of `aperture_mm` (0 = point sample).
double EdgeTransmission(double inside_mm, double penumbra_mm, double aperture_mm);

// Shadow of one blade edge for the extra-focal (off-focus) radiation: a broad source whose
// intensity falls off smoothly away from the focal spot, so its shadow is an error function
// of full width at half maximum `width_mm` (the projected source extent), not a ramp: a
// ramp's kinks at both ends show as false straight edges far outside the field once the
// image is log-transformed and sharpened. Shape from memory, no single source.
double SmoothEdgeTransmission(double inside_mm, double width_mm);

// The beam of one scenario with its per-scenario constants precomputed.
class BeamModel {
 public:
  explicit BeamModel(const SynthScenario& sc);
  // Collimator transmission at a detector point (mm), with leakage and off-focus radiation.
  double Collimator(double x, double y) const;
  // Relative free-in-air output at a detector point (mm): inverse square, obliquity, heel.
  double Shape(double x, double y) const;

 private:
  const SynthScenario& sc_;
  FieldFrame frame_;
  std::array<double, 4> focal_{}, off_{};
  double ax_ = 0, ay_ = 1, heel_k_ = 0;
};

// Collimator transmission at a detector point (mm), with leakage and off-focus radiation.
double CollimatorTransmission(const SynthScenario& sc, double x, double y);

// Relative free-in-air output at a detector point (mm): inverse square, obliquity, heel.
double BeamShape(const SynthScenario& sc, double x, double y);

ExposureMaps RenderExposure(const SynthScenario& sc, const SceneObjects& scene, int width,
                            int height);
void AddScatter(const SynthScenario& sc, const SceneObjects& scene, ExposureMaps& maps);

// Detector blur, residual gain pattern, quantum (Poisson) noise, in place on kerma (uGy).
void ApplyDetector(const SynthScenario& sc, Image& kerma, std::mt19937_64& rng);

}  // namespace beamtrim::synth_internal
