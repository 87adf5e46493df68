// Anatomy phantoms for the synthetic radiographs: ellipsoids, rods, hollow bone tubes and
// flat slabs, each with a material. A phantom gives the attenuation line integral
// sum(mu * t) at any detector point (Beer-Lambert) and the outline polygons of patient
// tissue used by the truth. Coordinates in mm at the detector plane. Value types; const
// methods are thread-safe.
#pragma once

#include <cstdint>
#include <random>
#include <vector>

#include "beamtrim/geometry.h"
#include "beamtrim/synth.h"

namespace beamtrim::synth_internal {

// Linear attenuation coefficients in 1/mm at an effective energy of about 0.4 x kVp.
// Approximate values from memory of NIST XCOM mass attenuation data near 50-60 keV.
enum class Material { kSoft, kLungDelta, kGasDelta, kBone, kMarrowDelta, kSteel, kLead };
double Mu(Material material, double kvp);

struct Primitive {
  enum class Kind { kEllipsoid, kRod, kTube, kSlab } kind = Kind::kEllipsoid;
  Material material = Material::kSoft;
  bool tissue = false;  // part of the patient's outline (soft tissue envelope)
  // Ellipsoid: centre, semi-axes a (along angle) and b, half depth c, angle (radians).
  // Rod / tube: segment p0-p1, radius (tube: outer radius r, inner radius r_inner).
  // Slab: polygon with a constant thickness.
  Point2d centre;
  double a = 0.0, b = 0.0, c = 0.0, angle = 0.0;
  Point2d p0, p1;
  double r = 0.0, r_inner = 0.0;
  Polygon polygon;
  double thickness = 0.0;
  // Multiplies the path length: 1/M for shapes scaled by the magnification (their projected
  // size grows, their depth does not), -1 to hollow out another primitive.
  double weight = 1.0;
  // Bounding box (mm), filled by Finish().
  double x0 = 0, y0 = 0, x1 = 0, y1 = 0;

  void Finish();
  // Geometric chord (mm, before `weight`) along the ray hitting detector point (x, y).
  double PathLength(double x, double y) const;
  // Outline in the detector plane (for tissue), sampled finely enough for 0.01 mm accuracy.
  Polygon Outline() const;
};

struct Phantom {
  std::vector<Primitive> parts;
  double typical_thickness_mm = 200.0;  // for scatter modelling

  // sum(mu * t) at the detector point (x, y), 1/mm * mm = dimensionless.
  double LineIntegral(double x, double y, double kvp) const;
  // Path through soft tissue only (thickness of the patient at that point).
  double TissueThickness(double x, double y) const;
  std::vector<Polygon> TissueOutlines() const;
};

// Builds the anatomy of the scenario (placement, scale, magnification, implants) and the
// lead markers and shields, kept apart because they are not patient tissue.
struct SceneObjects {
  Phantom patient;
  Phantom lead;  // markers and shields
};
SceneObjects BuildScene(const SynthScenario& scenario);

// Builds the anatomy centred at (0, 0) before placement, patient-plane mm.
Phantom BuildAnatomy(SynthBodyPart part, const std::string& view, bool implant,
                     std::mt19937_64& rng);

}  // namespace beamtrim::synth_internal
