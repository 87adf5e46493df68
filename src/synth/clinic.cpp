// The fictional clinic of the demo: four rooms and nine radiographers with different
// collimation habits, examined over three months. Everything here is invented; the habits
// are there so that the audit has something to find (docs/synth.md, "Clinic").
#include <array>

#include "synth/scenario_internal.h"

namespace beamtrim {
namespace synth_internal {
namespace {

using B = SynthBodyPart;
using T = TransferSyntax;

struct Radiographer {
  const char* code;
  Habit habit;
  // Situation weights: typical, wide, tight, rotated, cropped, blanked, blade-outside, open.
  std::array<double, 8> weights;
};

const std::array<Radiographer, 9>& Staff() {
  static const std::array<Radiographer, 9> staff = {{
      {"RT-01", {-2, 12, 30, 60}, {80, 3, 6, 6, 0, 0, 4, 1}},     // careful
      {"RT-02", {0, 15, 30, 60}, {82, 4, 3, 6, 0, 1, 3, 1}},      // careful
      {"RT-03", {0, 30, 40, 90}, {65, 12, 5, 6, 2, 2, 6, 2}},     // average
      {"RT-04", {5, 35, 40, 100}, {62, 15, 4, 6, 2, 2, 7, 2}},    // average
      {"RT-05", {30, 70, 60, 130}, {30, 50, 1, 4, 2, 2, 8, 3}},   // habitually wide
      {"RT-06", {20, 55, 50, 120}, {40, 40, 2, 5, 2, 2, 7, 2}},   // wide
      {"RT-07", {15, 50, 50, 120}, {20, 20, 2, 3, 30, 22, 2, 1}}, // crops and masks
      {"RT-08", {-15, 10, 30, 60}, {60, 2, 30, 4, 0, 0, 3, 1}},   // tight, clips anatomy
      {"RT-09", {0, 25, 40, 90}, {70, 8, 5, 8, 2, 2, 4, 1}},      // average, part time
  }};
  return staff;
}

const std::array<Room, 4>& Rooms() {
  static const std::array<Room, 4> rooms = {{
      {"XR-ROOM-1", false, {B::kChest, B::kChest, B::kChest, B::kSkull},
       {T::kJpeg2000Lossless, T::kExplicitLittle}, "", {}},
      // Table room whose collimator reports edges with a known miscalibration.
      {"XR-ROOM-2", false, {B::kAbdomen, B::kPelvis, B::kPelvis, B::kKnee, B::kChest},
       {T::kJpegLossless, T::kExplicitLittle, T::kJpeg2000}, "collimator", {6.0, 2.0, -4.0, 9.0}},
      {"XR-ROOM-3", true, {B::kHand, B::kFoot, B::kKnee, B::kForearm, B::kHand},
       {T::kExplicitLittle, T::kRle, T::kJpegLsLossless, T::kImplicitLittle}, "", {}},
      {"XR-ROOM-4", false, {B::kHand, B::kFoot, B::kKnee, B::kForearm, B::kSkull, B::kChest},
       {T::kJpeg2000, T::kJpegBaseline, T::kDeflated, T::kExplicitBig}, "shutter", {}},
  }};
  return rooms;
}

constexpr SynthSituation kHabitSituations[8] = {
    SynthSituation::kTypical, SynthSituation::kWide,    SynthSituation::kTight,
    SynthSituation::kRotated, SynthSituation::kCropped, SynthSituation::kBlanked,
    SynthSituation::kBladeOutside, SynthSituation::kOpen};

}  // namespace
}  // namespace synth_internal

SynthScenario ClinicScenario(uint64_t seed, int index, const SynthOptions& options) {
  using namespace synth_internal;
  std::mt19937_64 rng(MixSeed(seed, static_cast<uint64_t>(index), 2));
  // Staff share the rooms unevenly; RT-09 works part time.
  std::discrete_distribution<int> who({14, 12, 13, 12, 12, 10, 12, 10, 5});
  const Radiographer& rt = Staff()[who(rng)];
  std::discrete_distribution<int> where({30, 30, 22, 18});
  const Room& room = Rooms()[where(rng)];
  std::discrete_distribution<int> what(rt.weights.begin(), rt.weights.end());
  SynthSituation situation = kHabitSituations[what(rng)];
  // A few plates and exams of their own kind, whoever takes them.
  std::uniform_real_distribution<double> u(0, 1);
  double r = u(rng);
  if (room.cr && r < 0.08) situation = SynthSituation::kDoubleExposure;
  else if (r < 0.05) situation = SynthSituation::kShield;
  else if (r < 0.09) situation = SynthSituation::kImplant;
  if (options.situation != SynthSituation::kAny) situation = options.situation;
  SynthScenario sc = DrawScenario(seed, index, situation, rt.habit, options, rng, &room);
  sc.operator_code = rt.code;
  sc.station = room.station;
  sc.institution = "Riverside Synthetic Imaging Centre (fictional)";
  return sc;
}

}  // namespace beamtrim
