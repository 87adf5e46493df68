// Anatomy phantoms per body part, and the scene: placement on the receptor, implants, lead
// markers and shields. Sizes are rough adult dimensions in mm at the patient plane (from
// memory of general anatomy, not from a reference phantom).
#include <algorithm>
#include <cmath>

#include "synth/model.h"
#include "synth/phantom.h"

namespace beamtrim::synth_internal {
namespace {

double Deg(double d) { return d * kPi / 180.0; }

class Builder {
 public:
  Phantom out;

  void Ellipsoid(double cx, double cy, double a, double b, double c, double angle_deg,
                 Material m = Material::kSoft, bool tissue = false) {
    Primitive p;
    p.kind = Primitive::Kind::kEllipsoid;
    p.material = m;
    p.tissue = tissue;
    p.centre = {cx, cy};
    p.a = a; p.b = b; p.c = c; p.angle = Deg(angle_deg);
    out.parts.push_back(p);
  }
  void Body(double cx, double cy, double a, double b, double c, double angle_deg = 0) {
    Ellipsoid(cx, cy, a, b, c, angle_deg, Material::kSoft, true);
  }
  void Limb(double x0, double y0, double x1, double y1, double r) {
    Primitive p;
    p.kind = Primitive::Kind::kRod;
    p.material = Material::kSoft;
    p.tissue = true;
    p.p0 = {x0, y0}; p.p1 = {x1, y1}; p.r = r;
    out.parts.push_back(p);
  }
  // A body segment of elliptical cross-section: a limb `half_depth` deep along the beam (the
  // forefoot is wider than it is deep).
  void FlatLimb(double x0, double y0, double x1, double y1, double r, double half_depth) {
    Limb(x0, y0, x1, y1, r);
    out.parts.back().weight = half_depth / r;
  }
  // Long bone: cortical shell around a marrow cavity.
  void Bone(double x0, double y0, double x1, double y1, double r, double wall = 0.45) {
    Primitive p;
    p.kind = Primitive::Kind::kTube;
    p.material = Material::kBone;
    p.p0 = {x0, y0}; p.p1 = {x1, y1}; p.r = r; p.r_inner = r * (1.0 - wall);
    out.parts.push_back(p);
  }
  void Rod(double x0, double y0, double x1, double y1, double r, Material m) {
    Primitive p;
    p.kind = Primitive::Kind::kRod;
    p.material = m;
    p.p0 = {x0, y0}; p.p1 = {x1, y1}; p.r = r;
    out.parts.push_back(p);
  }
  void Slab(Polygon poly, double thickness, Material m) {
    Primitive p;
    p.kind = Primitive::Kind::kSlab;
    p.material = m;
    p.polygon = std::move(poly);
    p.thickness = thickness;
    out.parts.push_back(p);
  }
};

void Chest(Builder& b, bool lateral) {
  if (lateral) {
    b.Body(0, 20, 125, 240, 165);
    b.Limb(-20, -230, -60, -420, 45);  // arms raised
    b.Ellipsoid(0, -20, 95, 150, 120, 0, Material::kLungDelta);
    b.Ellipsoid(-35, 60, 65, 70, 60, 0);
    b.Bone(80, -330, 85, 260, 20);
    b.out.typical_thickness_mm = 330;
    return;
  }
  b.Body(0, 20, 165, 235, 110);
  b.Limb(0, -230, 0, -340, 55);  // neck
  for (int s : {-1, 1}) {
    b.Body(s * 150, -185, 70, 45, 70);
    b.Limb(s * 210, -170, s * 232, 160, 40);  // arms beside the trunk
    b.Bone(s * 215, -170, s * 230, 150, 13);
    b.Ellipsoid(s * 80, -20, 70, 150, 70, s * 5, Material::kLungDelta);
    b.Bone(s * 20, -175, s * 145, -200, 8);  // clavicle
    for (int i = 0; i < 9; ++i) {
      double y = -150 + i * 30;
      b.Bone(s * 18, y, s * 150, y + 35 + 3 * i, 5, 0.5);  // ribs
    }
  }
  b.Ellipsoid(25, 60, 75, 70, 50, 0);  // heart adds soft tissue
  b.Bone(0, -340, 0, 260, 17);         // spine
  b.out.typical_thickness_mm = 220;
}

void Abdomen(Builder& b, std::mt19937_64& rng) {
  b.Body(0, 0, 170, 270, 110);
  b.Bone(0, -300, 0, 170, 18);
  for (int s : {-1, 1}) {
    b.Ellipsoid(s * 95, 140, 70, 55, 8, s * 20, Material::kBone);
    b.Ellipsoid(s * 95, 240, 25, 25, 25, 0, Material::kBone);
    b.Bone(s * 18, -260, s * 150, -200, 5, 0.5);
  }
  b.Ellipsoid(0, 175, 40, 50, 20, 0, Material::kBone);
  b.Ellipsoid(-70, -130, 90, 70, 60, 0);
  std::uniform_real_distribution<double> x(-110, 110), y(-120, 120), r(12, 35);
  for (int i = 0; i < 7; ++i) {
    double rr = r(rng);
    b.Ellipsoid(x(rng), y(rng), rr, rr * 0.8, rr * 0.8, 0, Material::kGasDelta);
  }
  b.out.typical_thickness_mm = 220;
}

void Pelvis(Builder& b) {
  b.Body(0, -40, 175, 220, 105);
  b.Bone(0, -300, 0, 60, 18);
  for (int s : {-1, 1}) {
    b.Limb(s * 90, 140, s * 110, 460, 80);
    b.Bone(s * 100, 180, s * 118, 460, 14);
    b.Bone(s * 100, 180, s * 78, 140, 16);
    b.Ellipsoid(s * 75, 135, 25, 25, 25, 0, Material::kBone);
    b.Ellipsoid(s * 90, -20, 85, 65, 9, s * 25, Material::kBone);
    b.Bone(s * 12, 150, s * 75, 158, 9);
  }
  b.Ellipsoid(0, 40, 40, 55, 22, 0, Material::kBone);
  b.out.typical_thickness_mm = 210;
}

void Skull(Builder& b, bool lateral) {
  double a = lateral ? 95 : 75;
  double c = lateral ? 75 : 90;
  b.Body(0, 0, a, 100, c);
  b.Limb(lateral ? 20 : 0, 90, lateral ? 30 : 0, 260, 50);
  b.Ellipsoid(0, 0, a - 3, 97, c - 3, 0, Material::kBone);
  b.Ellipsoid(0, 0, a - 10, 90, c - 10, 0, Material::kBone);
  b.out.parts.back().weight = -1.0;  // inner ellipsoid removes bone: hollow skull
  if (!lateral) {
    for (int s : {-1, 1}) b.Ellipsoid(s * 30, -5, 18, 15, 20, 0, Material::kGasDelta);
    b.Bone(-55, 40, 0, 88, 7);
    b.Bone(0, 88, 55, 40, 7);
  } else {
    b.Bone(-40, 50, 10, 80, 7);
    b.Ellipsoid(-35, -10, 25, 20, 30, 0, Material::kGasDelta);
  }
  b.out.typical_thickness_mm = 170;
}

void Hand(Builder& b) {
  b.Body(0, 20, 45, 55, 14);
  for (int k = 0; k < 4; ++k) {
    double bx = -30 + k * 20;
    double tipx = bx * 1.35, len = (k == 1 || k == 2) ? 85 : 72;
    b.Limb(bx, -20, tipx, -20 - len, 9);
    b.Bone(bx, -25, tipx, -15 - len, 4.5, 0.5);
    b.Bone(bx * 0.6, 60, bx, -25, 4.5, 0.5);
  }
  b.Limb(40, 35, 85, -30, 11);
  b.Bone(40, 35, 83, -27, 5, 0.5);
  b.Ellipsoid(0, 70, 28, 16, 12, 0, Material::kBone);  // carpals, inside the wrist
  b.Limb(0, 75, 0, 320, 32);
  b.Bone(-15, 80, -14, 320, 8);
  b.Bone(14, 82, 13, 320, 7);
  b.out.typical_thickness_mm = 30;
}

void Forearm(Builder& b) {
  b.Limb(0, -180, 0, 180, 36);
  b.Limb(0, -320, 0, -200, 42);  // the upper arm around the humerus
  b.Body(0, -200, 48, 40, 40);
  b.Body(0, 240, 45, 55, 14);  // start of the hand
  b.Bone(-16, -220, -15, 215, 8);
  b.Bone(15, -215, 13, 215, 7);
  b.Bone(0, -300, 0, -215, 14);
  b.out.typical_thickness_mm = 65;
}

void Knee(Builder& b, bool lateral) {
  b.Limb(0, -420, 0, -250, 70);  // the thigh narrows towards the knee
  b.Limb(0, -250, 0, -20, 56);
  b.Limb(0, 20, 0, 420, 48);
  b.Body(0, 0, 58, 60, 55);
  b.Bone(0, -420, 0, -40, 15);
  b.Bone(5, 40, 5, 420, 14);
  b.Ellipsoid(0, 35, 40, 15, 35, 0, Material::kBone);
  if (lateral) {
    b.Ellipsoid(0, -25, 35, 28, 30, 0, Material::kBone);
    b.Ellipsoid(-42, -10, 12, 25, 12, 0, Material::kBone);  // patella, anterior, under the skin
  } else {
    for (int s : {-1, 1}) b.Ellipsoid(s * 22, -20, 28, 25, 30, 0, Material::kBone);
    b.Bone(40, 60, 38, 420, 7);
    b.Ellipsoid(0, -25, 22, 28, 10, 0, Material::kBone);
  }
  b.out.typical_thickness_mm = 110;
}

void Foot(Builder& b) {
  b.Body(0, 0, 45, 115, 25);
  b.FlatLimb(-18, -90, 18, -90, 22, 15);  // the forefoot is widest across the metatarsal heads
  for (int k = 0; k < 5; ++k) {
    double x = -32 + k * 15;
    double len = k == 0 ? 40 : 30 - 3 * k;
    b.Limb(x, -105, x * 1.1, -105 - len, k == 0 ? 12 : 8);
    b.Bone(x * 0.6, -15, x, -100, 4.5, 0.5);
    b.Bone(x, -105, x * 1.1, -100 - len, 3.5, 0.5);
  }
  b.Ellipsoid(0, 70, 28, 35, 30, 0, Material::kBone);  // calcaneus, inside the heel pad
  b.Ellipsoid(0, 20, 30, 30, 20, 0, Material::kBone);
  b.out.typical_thickness_mm = 60;
}

// A plate with screws along the longest bone (steel; not patient tissue).
void AddImplant(Builder& b, std::mt19937_64& rng) {
  const Primitive* bone = nullptr;
  double best = 0.0;
  for (const Primitive& p : b.out.parts) {
    if (p.kind != Primitive::Kind::kTube) continue;
    double len = std::hypot(p.p1.x - p.p0.x, p.p1.y - p.p0.y);
    if (len > best) { best = len; bone = &p; }
  }
  if (!bone) return;
  Primitive host = *bone;
  double dx = (host.p1.x - host.p0.x) / best, dy = (host.p1.y - host.p0.y) / best;
  std::uniform_real_distribution<double> at(0.25, 0.6);
  double t0 = at(rng) * best, len = std::min(120.0, 0.35 * best);
  Point2d a{host.p0.x + dx * t0, host.p0.y + dy * t0};
  double nx = -dy, ny = dx, off = host.r + 2.0;
  Polygon plate{{a.x + nx * off, a.y + ny * off},
                {a.x + nx * (off + 5) , a.y + ny * (off + 5)},
                {a.x + nx * (off + 5) + dx * len, a.y + ny * (off + 5) + dy * len},
                {a.x + nx * off + dx * len, a.y + ny * off + dy * len}};
  b.Slab(plate, 4.0, Material::kSteel);  // beam through the plate's thickness
  for (int i = 0; i < 4; ++i) {
    double t = (i + 0.5) * len / 4;
    Point2d p{a.x + dx * t + nx * (off + 5), a.y + dy * t + ny * (off + 5)};
    b.Rod(p.x, p.y, p.x - nx * (2 * host.r + 8), p.y - ny * (2 * host.r + 8), 2.0,
          Material::kSteel);
  }
}

}  // namespace

Phantom BuildAnatomy(SynthBodyPart part, const std::string& view, bool implant,
                     std::mt19937_64& rng) {
  Builder b;
  bool lateral = view == "LL" || view == "RL";
  switch (part) {
    case SynthBodyPart::kChest: Chest(b, lateral); break;
    case SynthBodyPart::kAbdomen: Abdomen(b, rng); break;
    case SynthBodyPart::kPelvis: Pelvis(b); break;
    case SynthBodyPart::kSkull: Skull(b, lateral); break;
    case SynthBodyPart::kHand: Hand(b); break;
    case SynthBodyPart::kForearm: Forearm(b); break;
    case SynthBodyPart::kKnee: Knee(b, lateral); break;
    case SynthBodyPart::kFoot: Foot(b); break;
  }
  if (implant) AddImplant(b, rng);
  return b.out;
}

namespace {

// Moves a patient-plane phantom onto the detector: scale by M and the patient's size, rotate,
// translate. Depths do not magnify, so projected chords are weighted back by 1/M.
void Place(Phantom& ph, const SynthScenario& sc) {
  double m = Magnification(sc), k = m * sc.anatomy_scale;
  double c = std::cos(Deg(sc.anatomy_rotation_deg)), s = std::sin(Deg(sc.anatomy_rotation_deg));
  double flip = sc.laterality_right ? 1.0 : -1.0;  // mirror image for the other side
  auto map = [&](Point2d p) {
    double x = flip * p.x * k, y = p.y * k;
    return Point2d{sc.anatomy_x_mm + x * c - y * s, sc.anatomy_y_mm + x * s + y * c};
  };
  for (Primitive& p : ph.parts) {
    p.centre = map(p.centre);
    p.p0 = map(p.p0);
    p.p1 = map(p.p1);
    for (Point2d& q : p.polygon) q = map(q);
    if (p.kind == Primitive::Kind::kEllipsoid) {
      p.a *= k; p.b *= k; p.c *= sc.anatomy_scale;
      p.angle = flip * p.angle + Deg(sc.anatomy_rotation_deg);
    } else if (p.kind == Primitive::Kind::kRod || p.kind == Primitive::Kind::kTube) {
      p.r *= k; p.r_inner *= k;
      p.weight /= m;
    }
    p.Finish();
  }
  ph.typical_thickness_mm *= sc.anatomy_scale;
}

// A lead letter on a 1 mm plate, height h, top-left at (x, y) on the detector.
Polygon Letter(bool right, double x, double y, double h) {
  double w = 0.7 * h, t = 0.22 * h;
  if (!right) {
    return {{x, y}, {x + t, y}, {x + t, y + h - t}, {x + w, y + h - t}, {x + w, y + h}, {x, y + h}};
  }
  // "R" drawn as a stem, a closed bowl outline approximated by a notch, and a leg.
  return {{x, y}, {x + w, y}, {x + w, y + 0.5 * h}, {x + 0.45 * w, y + 0.5 * h},
          {x + w, y + h}, {x + w - t, y + h}, {x + t + 0.1 * w, y + 0.55 * h},
          {x + t, y + 0.55 * h}, {x + t, y + h}, {x, y + h}};
}

void AddMarker(Phantom& lead, const SynthScenario& sc, std::mt19937_64& rng) {
  FieldFrame f(sc);
  std::uniform_real_distribution<double> inset(8.0, 25.0);
  std::bernoulli_distribution coin(0.5);
  double u = coin(rng) ? -sc.edge_mm[0] + inset(rng) : sc.edge_mm[1] - inset(rng) - 12.0;
  double v = coin(rng) ? -sc.edge_mm[2] + inset(rng) : sc.edge_mm[3] - inset(rng) - 16.0;
  Point2d p = f.FromField(u, v);
  // Keep the marker on the receptor when the blade lies beyond it.
  p.x = std::clamp(p.x, 10.0, sc.receptor_width_mm - 25.0);
  p.y = std::clamp(p.y, 10.0, sc.receptor_height_mm - 30.0);
  Primitive m;
  m.kind = Primitive::Kind::kSlab;
  m.material = Material::kLead;
  m.polygon = Letter(sc.laterality_right, p.x, p.y, 16.0);
  m.thickness = 1.0;
  m.Finish();
  lead.parts.push_back(m);
}

// A lead shield lying across the bottom (or top) blade edge, its straight border tilted
// slightly against the blade: gonad shield on the pelvis, thyroid collar on chest and skull,
// an apron edge on limbs.
void AddShield(Phantom& lead, const SynthScenario& sc, std::mt19937_64& rng) {
  FieldFrame f(sc);
  std::uniform_real_distribution<double> depth(10.0, 35.0), tilt(-12.0, 12.0), shift(-40, 40);
  bool top = sc.body_part == SynthBodyPart::kChest || sc.body_part == SynthBodyPart::kSkull;
  double edge = top ? -sc.edge_mm[2] : sc.edge_mm[3];
  double into = top ? depth(rng) : -depth(rng);
  double cu = shift(rng), half = 60.0, reach = 120.0;
  double ta = std::tan(Deg(tilt(rng)));
  Polygon poly;
  if (sc.body_part == SynthBodyPart::kPelvis || sc.body_part == SynthBodyPart::kAbdomen) {
    // Rounded-triangle gonad shield, apex pointing out of the field.
    double v0 = edge + into, dir = top ? -1.0 : 1.0;
    for (int i = 0; i <= 12; ++i) {
      double a = kPi * i / 12;
      poly.push_back(f.FromField(cu + half * std::cos(a), v0 - dir * 25.0 * std::sin(a)));
    }
    poly.push_back(f.FromField(cu, v0 + dir * 110.0));
  } else {
    double v0 = edge + into;
    double v1 = v0 + (top ? -reach : reach);
    poly = {f.FromField(cu - 2 * half, v0 - ta * 2 * half), f.FromField(cu + 2 * half, v0 + ta * 2 * half),
            f.FromField(cu + 2 * half, v1), f.FromField(cu - 2 * half, v1)};
  }
  Primitive m;
  m.kind = Primitive::Kind::kSlab;
  m.material = Material::kLead;
  m.polygon = poly;
  m.thickness = 0.5;
  m.Finish();
  lead.parts.push_back(m);
}

}  // namespace

SceneObjects BuildScene(const SynthScenario& sc) {
  std::mt19937_64 rng(sc.seed * 0x9E3779B97F4A7C15ull + static_cast<uint64_t>(sc.index) * 7919 + 11);
  SceneObjects scene;
  scene.patient = BuildAnatomy(sc.body_part, sc.view, sc.implant, rng);
  Place(scene.patient, sc);
  if (sc.marker) AddMarker(scene.lead, sc, rng);
  if (sc.shield) AddShield(scene.lead, sc, rng);
  return scene;
}

}  // namespace beamtrim::synth_internal
