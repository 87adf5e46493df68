// Internals of scenario drawing shared by the random generator and the fictional clinic.
#pragma once

#include <cstdint>
#include <optional>
#include <random>
#include <string>
#include <vector>

#include "beamtrim/synth.h"

namespace beamtrim::synth_internal {

// How a (fictional) radiographer collimates: margins beyond the region of interest, in mm at
// the detector plane, and how often each habit shows.
struct Habit {
  double margin_lo_mm = -3.0;
  double margin_hi_mm = 30.0;
  double wide_lo_mm = 40.0;
  double wide_hi_mm = 120.0;
};

// Room properties imposed on a drawn scenario (the clinic); empty fields leave the draw alone.
struct Room {
  std::string station;
  bool cr = false;
  std::vector<SynthBodyPart> parts;
  std::vector<TransferSyntax> syntaxes;
  std::string declared;                  // "", "collimator", "shutter"
  std::array<double, 4> declared_offset_mm{};
};

uint64_t MixSeed(uint64_t seed, uint64_t index, uint64_t stream);
SynthSituation DrawSituation(std::mt19937_64& rng);

// Draws everything for one image of the given situation.
SynthScenario DrawScenario(uint64_t seed, int index, SynthSituation situation,
                           const Habit& habit, const SynthOptions& options,
                           std::mt19937_64& rng, const Room* room = nullptr);

}  // namespace beamtrim::synth_internal
