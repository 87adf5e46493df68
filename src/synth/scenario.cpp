// Drawing scenarios: situation class, body part, geometry, beam, output and header identity,
// all from a generator seeded by (seed, index) so that every image is reproducible alone.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <random>

#include "synth/model.h"
#include "synth/phantom.h"
#include "synth/scenario_internal.h"

namespace beamtrim {
namespace {

using synth_internal::Habit;

struct NamedSituation {
  SynthSituation value;
  const char* name;
  double weight;  // share when drawn at random
};
constexpr NamedSituation kSituations[] = {
    {SynthSituation::kTypical, "typical", 30},
    {SynthSituation::kRotated, "rotated", 8},
    {SynthSituation::kOpen, "open", 4},
    {SynthSituation::kBladeOutside, "blade-outside", 8},
    {SynthSituation::kSmallField, "small-field", 5},
    {SynthSituation::kTight, "tight", 7},
    {SynthSituation::kWide, "wide", 10},
    {SynthSituation::kBlanked, "blanked", 5},
    {SynthSituation::kCropped, "cropped", 5},
    {SynthSituation::kDoubleExposure, "double-exposure", 4},
    {SynthSituation::kShield, "shield", 5},
    {SynthSituation::kImplant, "implant", 5},
    {SynthSituation::kDeclaredOffset, "declared-offset", 4},
};

constexpr const char* kBodyPartNames[] = {"CHEST", "ABDOMEN", "PELVIS", "SKULL",
                                         "HAND",  "KNEE",    "FOREARM", "FOOT"};

}  // namespace

const char* SynthSituationName(SynthSituation situation) {
  if (situation == SynthSituation::kAny) return "any";
  for (const NamedSituation& s : kSituations) {
    if (s.value == situation) return s.name;
  }
  return "any";
}

std::optional<SynthSituation> ParseSynthSituation(std::string_view name) {
  if (name == "any") return SynthSituation::kAny;
  for (const NamedSituation& s : kSituations) {
    if (name == s.name) return s.value;
  }
  return std::nullopt;
}

std::vector<SynthSituation> AllSynthSituations() {
  std::vector<SynthSituation> out;
  for (const NamedSituation& s : kSituations) out.push_back(s.value);
  return out;
}

const char* SynthBodyPartName(SynthBodyPart part) {
  return kBodyPartNames[static_cast<int>(part)];
}

std::vector<SynthBodyPart> AllSynthBodyParts() {
  std::vector<SynthBodyPart> out;
  for (int i = 0; i < 8; ++i) out.push_back(static_cast<SynthBodyPart>(i));
  return out;
}

double GeometricPenumbraMm(double focal_spot_mm, double sid_mm, double blade_distance_mm) {
  return focal_spot_mm * (sid_mm - blade_distance_mm) / blade_distance_mm;
}

namespace synth_internal {

uint64_t MixSeed(uint64_t seed, uint64_t index, uint64_t stream) {
  // SplitMix64 finaliser over the three inputs: distinct streams for nearby indices.
  uint64_t z = seed * 0x9E3779B97F4A7C15ull ^ (index + 0x632BE59BD9B4E019ull) * 0xBF58476D1CE4E5B9ull ^
               stream * 0x94D049BB133111EBull;
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

SynthSituation DrawSituation(std::mt19937_64& rng) {
  std::vector<double> w;
  for (const NamedSituation& s : kSituations) w.push_back(s.weight);
  std::discrete_distribution<int> pick(w.begin(), w.end());
  return kSituations[pick(rng)].value;
}

}  // namespace synth_internal

SynthScenario RandomScenario(uint64_t seed, int index, const SynthOptions& options) {
  std::mt19937_64 rng(synth_internal::MixSeed(seed, static_cast<uint64_t>(index), 1));
  SynthSituation situation = options.situation == SynthSituation::kAny
                                 ? synth_internal::DrawSituation(rng)
                                 : options.situation;
  return synth_internal::DrawScenario(seed, index, situation, Habit{}, options, rng);
}

}  // namespace beamtrim
