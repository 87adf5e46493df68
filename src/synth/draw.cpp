// DrawScenario: one image's knobs from its situation, the radiographer's habit and the room.
// Ranges are typical clinical values from memory (no single source); docs/synth.md lists them.
#include <algorithm>
#include <cmath>
#include <cstdio>

#include "synth/model.h"
#include "synth/scenario_internal.h"

namespace beamtrim::synth_internal {
namespace {

using U = std::uniform_real_distribution<double>;

struct BodySpec {
  std::vector<const char*> views;
  double sid_lo, sid_hi, kvp_lo, kvp_hi;
  bool grid;
  bool small_focus;
  double thickness;  // patient thickness along the beam, mm
  // Region the exam needs, patient-plane mm around the phantom origin: left, right, top, bottom.
  std::array<double, 4> roi;
  std::array<double, 2> receptor;  // preferred receptor (width, height) in mm
  double target_ei;
};

BodySpec Spec(SynthBodyPart part, bool lateral) {
  switch (part) {
    case SynthBodyPart::kChest:
      return {{"PA", "PA", "PA", "LL"}, 1800, 1830, 110, 125, true, false, lateral ? 330 : 220,
              lateral ? std::array<double, 4>{-135, 135, -215, 165}
                      : std::array<double, 4>{-168, 168, -215, 165},
              {430, 430}, 300};
    case SynthBodyPart::kAbdomen:
      return {{"AP"}, 1000, 1150, 75, 85, true, false, 220, {-165, 165, -230, 230},
              {350, 430}, 400};
    case SynthBodyPart::kPelvis:
      return {{"AP"}, 1000, 1150, 75, 82, true, false, 210, {-175, 175, -135, 215},
              {430, 350}, 400};
    case SynthBodyPart::kSkull:
      return {{"PA", "LL"}, 1000, 1150, 70, 80, true, false, 170, {-82, 82, -105, 100},
              {240, 300}, 400};
    case SynthBodyPart::kHand:
      return {{"PA"}, 1000, 1100, 50, 57, false, true, 30, {-50, 93, -112, 92}, {240, 300}, 500};
    case SynthBodyPart::kKnee:
      return {{"AP", "LL"}, 1000, 1150, 60, 70, false, true, 110, {-78, 78, -125, 125},
              {240, 300}, 400};
    case SynthBodyPart::kForearm:
      return {{"AP", "LL"}, 1000, 1100, 55, 60, false, true, 65, {-52, 52, -240, 200},
              {350, 430}, 500};
    case SynthBodyPart::kFoot:
      return {{"AP"}, 1000, 1100, 55, 60, false, true, 60, {-52, 52, -160, 128},
              {240, 300}, 500};
  }
  return Spec(SynthBodyPart::kChest, false);
}

SynthBodyPart DrawBodyPart(SynthSituation situation, std::mt19937_64& rng) {
  using B = SynthBodyPart;
  std::vector<B> parts;
  std::vector<double> weights;
  switch (situation) {
    case SynthSituation::kDoubleExposure: parts = {B::kHand, B::kFoot, B::kKnee}; break;
    case SynthSituation::kShield: parts = {B::kPelvis, B::kAbdomen, B::kChest, B::kKnee}; break;
    case SynthSituation::kImplant: parts = {B::kKnee, B::kForearm, B::kPelvis, B::kFoot}; break;
    case SynthSituation::kSmallField: parts = {B::kHand, B::kFoot, B::kKnee, B::kSkull}; break;
    default:
      parts = AllSynthBodyParts();
      weights = {30, 10, 10, 8, 12, 12, 8, 10};
  }
  if (weights.empty()) weights.assign(parts.size(), 1.0);
  std::discrete_distribution<int> pick(weights.begin(), weights.end());
  return parts[pick(rng)];
}

// Corners of the field rectangle (detector mm).
std::array<Point2d, 4> Corners(const SynthScenario& sc) {
  FieldFrame f(sc);
  return {f.FromField(-sc.edge_mm[0], -sc.edge_mm[2]), f.FromField(sc.edge_mm[1], -sc.edge_mm[2]),
          f.FromField(sc.edge_mm[1], sc.edge_mm[3]), f.FromField(-sc.edge_mm[0], sc.edge_mm[3])};
}

// Pulls blades in until the whole field lies on the receptor with a little clearance, as a
// radiographer would when the field would run off the plate.
void FitOnReceptor(SynthScenario& sc, double clearance) {
  for (int iter = 0; iter < 2000; ++iter) {
    auto c = Corners(sc);
    bool moved = false;
    // corner k is formed by sides (left|right, top|bottom)
    const int us[4] = {0, 1, 1, 0}, vs[4] = {2, 2, 3, 3};
    for (int k = 0; k < 4; ++k) {
      bool out = c[k].x < clearance || c[k].y < clearance ||
                 c[k].x > sc.receptor_width_mm - clearance ||
                 c[k].y > sc.receptor_height_mm - clearance;
      if (!out) continue;
      // Pull a blade in by 1 mm unless the field would get narrower than 20 mm.
      for (int side : {us[k], vs[k]}) {
        int opposite = side ^ 1;
        if (sc.edge_mm[side] + sc.edge_mm[opposite] > 21.0) {
          sc.edge_mm[side] -= 1.0;
          moved = true;
        }
      }
    }
    if (!moved) return;
  }
}

// Places the anatomy so its region of interest is centred on the receptor (with jitter), and
// the central ray near the region's centre; returns the ROI corners on the detector.
std::array<Point2d, 4> PlaceAnatomy(SynthScenario& sc, const BodySpec& spec, std::mt19937_64& rng) {
  double k = Magnification(sc) * sc.anatomy_scale;
  double a = sc.anatomy_rotation_deg * kPi / 180.0, ca = std::cos(a), sa = std::sin(a);
  double flip = sc.laterality_right ? 1.0 : -1.0;
  auto rel = [&](double x, double y) {
    double X = flip * x * k, Y = y * k;
    return Point2d{X * ca - Y * sa, X * sa + Y * ca};
  };
  const auto& r = spec.roi;
  Point2d mid = rel(0.5 * (r[0] + r[1]), 0.5 * (r[2] + r[3]));
  std::normal_distribution<double> jitter(0.0, 8.0);
  sc.anatomy_x_mm = 0.5 * sc.receptor_width_mm - mid.x + jitter(rng);
  sc.anatomy_y_mm = 0.5 * sc.receptor_height_mm - mid.y + jitter(rng);
  std::array<Point2d, 4> out = {rel(r[0], r[2]), rel(r[1], r[2]), rel(r[1], r[3]), rel(r[0], r[3])};
  for (Point2d& p : out) p = {p.x + sc.anatomy_x_mm, p.y + sc.anatomy_y_mm};
  sc.ray_x_mm = 0.5 * sc.receptor_width_mm + jitter(rng) * 0.5;
  sc.ray_y_mm = 0.5 * sc.receptor_height_mm + jitter(rng) * 0.5;
  return out;
}

// Blade edges enclosing the ROI along the field axes, plus a margin per side.
void EdgesAround(SynthScenario& sc, const std::array<Point2d, 4>& roi,
                 const std::array<double, 4>& margin) {
  FieldFrame f(sc);
  double u0 = 1e9, u1 = -1e9, v0 = 1e9, v1 = -1e9;
  for (const Point2d& p : roi) {
    Point2d q = f.ToField(p.x, p.y);
    u0 = std::min(u0, q.x); u1 = std::max(u1, q.x);
    v0 = std::min(v0, q.y); v1 = std::max(v1, q.y);
  }
  sc.edge_mm = {-u0 + margin[0], u1 + margin[1], -v0 + margin[2], v1 + margin[3]};
  // Opposite blades may not cross: keep a minimum field of 20 mm.
  for (int k : {0, 2}) {
    double& a = sc.edge_mm[k];
    double& b = sc.edge_mm[k + 1];
    if (a + b < 20.0) {
      double centre = 0.5 * (b - a);  // keep the field centre, widen to 20 mm
      a = 10.0 - centre;
      b = 10.0 + centre;
    }
  }
}

// Crop or blank cuts per image side; half of them fall inside the field and hide the blade.
void DrawCuts(SynthScenario& sc, std::array<SynthSideCut, 4>& cuts, std::mt19937_64& rng) {
  auto c = Corners(sc);
  double x0 = 1e9, x1 = -1e9, y0 = 1e9, y1 = -1e9;
  for (const Point2d& p : c) {
    x0 = std::min(x0, p.x); x1 = std::max(x1, p.x);
    y0 = std::min(y0, p.y); y1 = std::max(y1, p.y);
  }
  // Distance from each receptor border to the field's extreme point on that side.
  std::array<double, 4> gap = {x0, sc.receptor_width_mm - x1, y0, sc.receptor_height_mm - y1};
  std::array<double, 4> span = {x1 - x0, x1 - x0, y1 - y0, y1 - y0};
  std::uniform_int_distribution<int> count(1, 4);
  std::bernoulli_distribution inside(0.5);
  std::array<int, 4> order = {0, 1, 2, 3};
  std::shuffle(order.begin(), order.end(), rng);
  int n = count(rng);
  for (int i = 0; i < n; ++i) {
    int side = order[i];
    double g = std::max(gap[side], 0.0);
    double inset = inside(rng) ? g + U(5.0, std::min(30.0, 0.2 * span[side]))(rng)
                               : g * U(0.3, 0.8)(rng);
    if (inset < 2.0) inset = g + 5.0;  // too thin to see: cut into the field instead
    cuts[side] = {true, inset};
  }
}

void DrawBeam(SynthScenario& sc, const BodySpec& spec, std::mt19937_64& rng) {
  sc.kvp = std::round(U(spec.kvp_lo, spec.kvp_hi)(rng));
  sc.grid = spec.grid && !sc.cr;
  if (sc.body_part == SynthBodyPart::kChest || sc.body_part == SynthBodyPart::kAbdomen ||
      sc.body_part == SynthBodyPart::kPelvis)
    sc.grid = true;
  sc.focal_spot_mm = spec.small_focus ? U(0.5, 0.7)(rng) : U(0.9, 1.3)(rng);
  double d1 = U(150, 200)(rng), d2 = std::min(250.0, d1 + U(20, 60)(rng));
  bool swap = std::bernoulli_distribution(0.5)(rng);
  sc.blade_distance_lr_mm = swap ? d2 : d1;
  sc.blade_distance_tb_mm = swap ? d1 : d2;
  // Lead blades a few mm thick pass far less than 0.1 % of the primary at diagnostic energies
  // (from memory); log-uniform 0.03-0.5 % keeps some faint anatomy under the blades to test
  // the detector against, without making leakage the main signal there.
  sc.blade_transmission = 0.0003 * std::pow(0.005 / 0.0003, U(0.0, 1.0)(rng));
  sc.off_focus_fraction = U(0.03, 0.10)(rng);
  sc.off_focus_size_mm = U(12, 30)(rng);
  sc.heel_strength = U(0.05, 0.2)(rng);
  const double dirs[] = {90, 270, 90, 270, 0, 180};
  sc.anode_angle_deg = dirs[std::uniform_int_distribution<int>(0, 5)(rng)];
  sc.scatter_scale = U(0.8, 1.25)(rng);
  sc.detector_blur_mm = sc.cr ? U(0.2, 0.35)(rng) : U(0.08, 0.2)(rng);
  sc.gain_variation = U(0.003, 0.015)(rng);
  sc.tube_output_ugy_per_mas_at_1m = 50.0 * (sc.kvp / 75.0) * (sc.kvp / 75.0);
  sc.target_exposure_index = spec.target_ei;
  // mAs so that the detector behind the patient gets about the target kerma (EI = 100 K[uGy],
  // IEC 62494-1), with the spread of real practice (sd ~ 1.5 DI units).
  double mu = 0.021 * std::pow(75.0 / sc.kvp, 0.35);
  double behind = std::exp(-mu * 0.85 * spec.thickness * sc.anatomy_scale) * (sc.grid ? 1.3 : 1.1);
  double want = sc.target_exposure_index / 100.0 * std::pow(10.0, std::normal_distribution<double>(0, 0.15)(rng));
  double k0 = want / std::max(behind, 1e-4);
  double per_mas = sc.tube_output_ugy_per_mas_at_1m * (1000.0 / sc.sid_mm) * (1000.0 / sc.sid_mm);
  sc.mas = std::max(0.5, std::round(10.0 * k0 / per_mas) / 10.0);
}

void DrawOutput(SynthScenario& sc, const SynthOptions& options, const Room* room,
                std::mt19937_64& rng) {
  const auto all = AllTransferSyntaxes();
  if (options.syntax) {
    sc.syntax = *options.syntax;
  } else if (room && !room->syntaxes.empty()) {
    sc.syntax = room->syntaxes[std::uniform_int_distribution<size_t>(0, room->syntaxes.size() - 1)(rng)];
  } else {
    sc.syntax = all[std::uniform_int_distribution<size_t>(0, all.size() - 1)(rng)];
  }
  bool raw = options.output == SynthOutput::kRaw ||
             (options.output == SynthOutput::kMixed && std::bernoulli_distribution(0.35)(rng));
  if (sc.syntax == TransferSyntax::kJpegBaseline) raw = false;
  sc.output = raw ? SynthOutput::kRaw : SynthOutput::kProcessed;
  sc.monochrome1 = !raw && std::bernoulli_distribution(0.5)(rng);
  const int bits[] = {12, 14, 16, 12, 10};
  sc.bits_stored = raw ? bits[std::uniform_int_distribution<int>(0, 2)(rng)]
                       : bits[std::uniform_int_distribution<int>(0, 4)(rng)];
  bool uncompressed = sc.syntax == TransferSyntax::kImplicitLittle ||
                      sc.syntax == TransferSyntax::kExplicitLittle ||
                      sc.syntax == TransferSyntax::kExplicitBig ||
                      sc.syntax == TransferSyntax::kDeflated || sc.syntax == TransferSyntax::kRle;
  sc.signed_pixels = uncompressed && sc.bits_stored < 16 && std::bernoulli_distribution(0.2)(rng);
  if (sc.syntax == TransferSyntax::kJpegBaseline) sc.bits_stored = 8;
  if (sc.syntax == TransferSyntax::kJpegExtended) sc.bits_stored = std::min(sc.bits_stored, 12);
  sc.rescale_slope = 1.0;
  sc.rescale_intercept = 0.0;
  if (sc.signed_pixels) {
    sc.rescale_intercept = std::ldexp(1.0, sc.bits_stored - 1);
  } else if (std::bernoulli_distribution(0.1)(rng)) {
    sc.rescale_slope = 0.5;
    sc.rescale_intercept = -100.0;
  }
  sc.noise = options.noise;
}

void DrawIdentity(SynthScenario& sc, std::mt19937_64& rng, const Room* room) {
  char buf[64];
  int patient = std::uniform_int_distribution<int>(1, 9999)(rng);
  std::snprintf(buf, sizeof buf, "SYNTH^PATIENT%04d", patient);
  sc.patient_name = buf;
  std::snprintf(buf, sizeof buf, "SYN%06d", patient * 7 + 13);
  sc.patient_id = buf;
  if (sc.operator_code.empty()) {
    std::snprintf(buf, sizeof buf, "RT-%02d", std::uniform_int_distribution<int>(1, 9)(rng));
    sc.operator_code = buf;
  }
  if (room) {
    sc.station = room->station;
  } else {
    std::snprintf(buf, sizeof buf, "XR-ROOM-%d", std::uniform_int_distribution<int>(1, 4)(rng));
    sc.station = buf;
  }
  sc.protocol = std::string(SynthBodyPartName(sc.body_part)) + " " + sc.view;
  // Study dates spread over 13 weeks from Monday 2026-01-05 (fictional period).
  int day = std::uniform_int_distribution<int>(0, 90)(rng);
  static const int kMonthDays[] = {31, 28, 31, 30};
  int month = 1, d = 5 + day;
  while (d > kMonthDays[month - 1]) d -= kMonthDays[month++ - 1];
  std::snprintf(buf, sizeof buf, "2026%02d%02d", month, d);
  sc.study_date = buf;
}

}  // namespace

SynthScenario DrawScenario(uint64_t seed, int index, SynthSituation situation,
                           const Habit& habit, const SynthOptions& options,
                           std::mt19937_64& rng, const Room* room) {
  SynthScenario sc;
  sc.seed = seed;
  sc.index = index;
  sc.situation = situation;
  sc.pixel_mm = options.pixel_mm;
  if (options.body_part) {
    sc.body_part = *options.body_part;
  } else if (room && !room->parts.empty()) {
    sc.body_part = room->parts[std::uniform_int_distribution<size_t>(0, room->parts.size() - 1)(rng)];
  } else {
    sc.body_part = DrawBodyPart(situation, rng);
  }
  BodySpec spec0 = Spec(sc.body_part, false);
  sc.view = spec0.views[std::uniform_int_distribution<size_t>(0, spec0.views.size() - 1)(rng)];
  bool lateral = sc.view == "LL";
  BodySpec spec = Spec(sc.body_part, lateral);
  sc.cr = room ? room->cr : std::bernoulli_distribution(0.25)(rng);
  if (situation == SynthSituation::kDoubleExposure) sc.cr = true;

  sc.receptor_width_mm = spec.receptor[0];
  sc.receptor_height_mm = spec.receptor[1];
  if (!sc.cr && sc.receptor_width_mm < 350) sc.receptor_width_mm = sc.receptor_height_mm = 430;
  if (situation == SynthSituation::kDoubleExposure) {
    sc.receptor_width_mm = 430;  // landscape plate, one exposure per half
    sc.receptor_height_mm = 350;
  }
  sc.sid_mm = std::round(U(spec.sid_lo, spec.sid_hi)(rng));
  double gap = sc.body_part == SynthBodyPart::kChest ? 30 : (spec.grid ? 60 : 10);
  sc.anatomy_scale = std::clamp(std::normal_distribution<double>(1.0, 0.06)(rng), 0.85, 1.2);
  sc.source_patient_mm = std::round(sc.sid_mm - gap - 0.5 * spec.thickness * sc.anatomy_scale);
  bool limb = sc.body_part == SynthBodyPart::kHand || sc.body_part == SynthBodyPart::kKnee ||
              sc.body_part == SynthBodyPart::kForearm || sc.body_part == SynthBodyPart::kFoot;
  sc.laterality_right = limb ? std::bernoulli_distribution(0.5)(rng) : true;
  std::normal_distribution<double> small_tilt(0.0, 1.5);

  // Field rotation, and the anatomy turned with it for limbs (the radiographer aligns both).
  sc.rotation_deg = std::bernoulli_distribution(0.8)(rng) ? 0.0 : small_tilt(rng);
  if (situation == SynthSituation::kRotated) {
    sc.rotation_deg = U(5.0, 44.0)(rng) * (std::bernoulli_distribution(0.5)(rng) ? 1 : -1);
  }
  sc.anatomy_rotation_deg = limb ? sc.rotation_deg + small_tilt(rng) * 2 : small_tilt(rng);
  if (situation == SynthSituation::kDoubleExposure) sc.anatomy_scale *= 0.85;
  auto roi = PlaceAnatomy(sc, spec, rng);
  if (situation == SynthSituation::kDoubleExposure) {
    double dx = sc.receptor_width_mm * 0.25 - sc.ray_x_mm;  // left half of the plate
    sc.ray_x_mm += dx;
    sc.anatomy_x_mm += dx;
    for (Point2d& p : roi) p.x += dx;
  }

  std::array<double, 4> margin;
  for (double& m : margin) m = U(habit.margin_lo_mm, habit.margin_hi_mm)(rng);
  if (situation == SynthSituation::kWide) {
    for (double& m : margin) m = U(habit.wide_lo_mm, habit.wide_hi_mm)(rng);
  }
  if (situation == SynthSituation::kTight) {
    int n = std::uniform_int_distribution<int>(1, 2)(rng);
    for (int i = 0; i < n; ++i) margin[std::uniform_int_distribution<int>(0, 3)(rng)] = -U(10, 45)(rng);
  }
  EdgesAround(sc, roi, margin);
  if (situation == SynthSituation::kSmallField) {
    // A few centimetres around one point of the region (a finger, a joint, a sinus view).
    Point2d c = roi[0];
    double t = U(0.3, 0.7)(rng), s = U(0.2, 0.8)(rng);
    c = {roi[0].x + t * (roi[1].x - roi[0].x) + s * (roi[3].x - roi[0].x),
         roi[0].y + t * (roi[1].y - roi[0].y) + s * (roi[3].y - roi[0].y)};
    sc.ray_x_mm = c.x;
    sc.ray_y_mm = c.y;
    for (double& e : sc.edge_mm) e = U(12, 35)(rng);
  }
  double clearance = U(3, 15)(rng);
  if (situation == SynthSituation::kDoubleExposure) {
    double saved = sc.receptor_width_mm;
    sc.receptor_width_mm = saved / 2;  // fit on the left half
    FitOnReceptor(sc, clearance);
    sc.receptor_width_mm = saved;
  } else {
    FitOnReceptor(sc, clearance);
  }
  if (situation == SynthSituation::kOpen) sc.edge_mm = {5000, 5000, 5000, 5000};
  if (situation == SynthSituation::kBladeOutside) {
    std::array<int, 4> order = {0, 1, 2, 3};
    std::shuffle(order.begin(), order.end(), rng);
    int n = std::uniform_int_distribution<int>(1, 3)(rng);
    for (int i = 0; i < n; ++i) sc.edge_mm[order[i]] = 5000;
  }
  if (situation == SynthSituation::kCropped) DrawCuts(sc, sc.crop, rng);
  if (situation == SynthSituation::kBlanked) {
    DrawCuts(sc, sc.blank, rng);
    sc.blank_value = std::bernoulli_distribution(0.5)(rng) ? 0.0f : 1.0f;
  }
  sc.double_exposure = situation == SynthSituation::kDoubleExposure;
  sc.shield = situation == SynthSituation::kShield;
  sc.implant = situation == SynthSituation::kImplant;
  sc.marker = std::bernoulli_distribution(0.85)(rng);

  // Declared collimation in the header.
  if (situation == SynthSituation::kDeclaredOffset) {
    sc.rotation_deg = 0.0;
    sc.declared = "collimator";
    for (double& o : sc.declared_offset_mm) o = U(-6, 6)(rng);
    int side = std::uniform_int_distribution<int>(0, 3)(rng);
    sc.declared_offset_mm[side] = U(8, 20)(rng) * (std::bernoulli_distribution(0.5)(rng) ? 1 : -1);
  } else if (room && !room->declared.empty()) {
    sc.declared = room->declared;
    sc.declared_offset_mm = room->declared_offset_mm;
  } else if (sc.rotation_deg == 0.0 && std::bernoulli_distribution(0.3)(rng)) {
    sc.declared = std::bernoulli_distribution(0.7)(rng) ? "collimator" : "shutter";
  }
  if (sc.rotation_deg != 0.0 && sc.declared == "collimator") sc.declared.clear();

  DrawBeam(sc, spec, rng);
  DrawOutput(sc, options, room, rng);
  DrawIdentity(sc, rng, room);
  return sc;
}

PixelWindow WindowOf(const SynthScenario& sc) {
  PixelWindow w;
  w.receptor_w = std::max(8, static_cast<int>(std::lround(sc.receptor_width_mm / sc.pixel_mm)));
  w.receptor_h = std::max(8, static_cast<int>(std::lround(sc.receptor_height_mm / sc.pixel_mm)));
  auto px = [&](const SynthSideCut& c) {
    return c.active ? static_cast<int>(std::lround(c.inset_mm / sc.pixel_mm)) : 0;
  };
  int l = px(sc.crop[0]), r = px(sc.crop[1]), t = px(sc.crop[2]), b = px(sc.crop[3]);
  l = std::min(l, w.receptor_w / 3); r = std::min(r, w.receptor_w / 3);
  t = std::min(t, w.receptor_h / 3); b = std::min(b, w.receptor_h / 3);
  w.x0 = l;
  w.y0 = t;
  w.w = w.receptor_w - l - r;
  w.h = w.receptor_h - t - b;
  return w;
}

std::array<double, 4> UnmaskedRectPx(const SynthScenario& sc, const PixelWindow& w) {
  auto cut = [&](const SynthSideCut& c) { return c.active ? c.inset_mm / sc.pixel_mm : 0.0; };
  return {std::max(0.0, cut(sc.blank[0]) - w.x0),
          std::max(0.0, cut(sc.blank[2]) - w.y0),
          std::min<double>(w.w, w.receptor_w - cut(sc.blank[1]) - w.x0),
          std::min<double>(w.h, w.receptor_h - cut(sc.blank[3]) - w.y0)};
}

SynthScenario SecondExposure(const SynthScenario& sc) {
  SynthScenario two = sc;
  two.index = sc.index + 1000003;  // its own anatomy details
  two.double_exposure = false;
  two.ray_x_mm = sc.receptor_width_mm - sc.ray_x_mm;
  two.anatomy_x_mm = sc.receptor_width_mm - sc.anatomy_x_mm;
  two.laterality_right = !sc.laterality_right;
  two.anatomy_rotation_deg = -sc.anatomy_rotation_deg;
  two.rotation_deg = -sc.rotation_deg;
  two.edge_mm = {sc.edge_mm[1], sc.edge_mm[0], sc.edge_mm[2], sc.edge_mm[3]};
  two.marker = false;
  return two;
}

}  // namespace beamtrim::synth_internal
