// Synthetic radiographs with exact ground truth, for tests, benchmarks and the demo. A
// scenario (every physical and header knob) is drawn deterministically from (seed, index);
// Generate() renders it: collimator blade shadows with focal-spot penumbra, heel effect,
// inverse-square fall-off, anatomy phantoms (Beer-Lambert), scatter, off-focus radiation,
// quantum and electronic noise, raw or processed output. The truth is computed from the
// geometry, never from the pixels. All data are invented (docs/synth.md).
// Pure functions of their arguments: thread-safe; results are value types owned by the caller.
#pragma once

#include <array>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/dicom_writer.h"
#include "beamtrim/field.h"
#include "beamtrim/geometry.h"
#include "beamtrim/image.h"
#include "beamtrim/record.h"
#include "beamtrim/status.h"

namespace beamtrim {

// The class of picture a scenario is drawn from; its name is the image's `situation` label.
enum class SynthSituation {
  kAny,             // draw the class at random (weights in docs/synth.md)
  kTypical,         // four blades visible, small rotation, sensible margins
  kRotated,         // field rotated 5..45 degrees
  kOpen,            // all four blades beyond the receptor: no collimation visible
  kBladeOutside,    // one to three blades beyond the receptor
  kSmallField,      // a very small field (a few cm)
  kTight,           // field cuts into the anatomy on one or more sides (clipping)
  kWide,            // field much larger than the anatomy
  kBlanked,         // outside of a rectangle set to a constant after exposure
  kCropped,         // image cut down after exposure; header shows the larger receptor
  kDoubleExposure,  // two exposed fields on one plate (CR)
  kShield,          // lead shield lying across a field edge
  kImplant,         // metal screws / plate inside the anatomy
  kDeclaredOffset,  // X-Ray Collimator edges present but miscalibrated by a known offset
};
const char* SynthSituationName(SynthSituation situation);
std::optional<SynthSituation> ParseSynthSituation(std::string_view name);
std::vector<SynthSituation> AllSynthSituations();  // every class except kAny

enum class SynthBodyPart { kChest, kAbdomen, kPelvis, kSkull, kHand, kKnee, kForearm, kFoot };
const char* SynthBodyPartName(SynthBodyPart part);  // DICOM defined term, e.g. "CHEST"
std::vector<SynthBodyPart> AllSynthBodyParts();

enum class SynthOutput {
  kRaw,        // linear, FOR PROCESSING, MONOCHROME2
  kProcessed,  // log + unsharp mask + window, FOR PRESENTATION, MONOCHROME1 or MONOCHROME2
  kMixed,      // chosen per image
};

struct SynthOptions {
  // Detector pixel pitch in mm. 0.5 gives small, fast images; 0.1-0.2 is full size.
  double pixel_mm = 0.5;
  SynthSituation situation = SynthSituation::kAny;
  std::optional<SynthBodyPart> body_part;     // nullopt: drawn at random
  SynthOutput output = SynthOutput::kMixed;
  std::optional<TransferSyntax> syntax;       // nullopt: drawn from AllTransferSyntaxes()
  bool noise = true;                          // false: noiseless pixels (physics tests)
};

// Where an electronic mask or crop sits relative to a blade shadow, per side.
struct SynthSideCut {
  bool active = false;
  double inset_mm = 0.0;  // from the receptor border inwards, detector plane
};

// Every knob of one picture. Lengths in mm at the detector plane unless named otherwise;
// coordinates in mm from the receptor's top-left corner, x to the right, y down. Sides are
// indexed by Side (left, right, top, bottom) in the field's own frame.
struct SynthScenario {
  uint64_t seed = 0;
  int index = 0;
  SynthSituation situation = SynthSituation::kTypical;
  SynthBodyPart body_part = SynthBodyPart::kChest;
  std::string view = "PA";  // DICOM View Position defined term: PA, AP, LL, RL ...

  // Receptor and pixels.
  double pixel_mm = 0.5;
  double receptor_width_mm = 430.0;
  double receptor_height_mm = 430.0;
  bool cr = false;  // computed radiography plate (else flat-panel DX)

  // Source and collimator. The central ray meets the receptor at (ray_x_mm, ray_y_mm).
  double sid_mm = 1000.0;
  double source_patient_mm = 900.0;   // source to the patient's central plane (SOD)
  double focal_spot_mm = 1.2;
  double blade_distance_lr_mm = 180.0;  // source to the left/right blade pair
  double blade_distance_tb_mm = 220.0;  // source to the top/bottom blade pair
  double ray_x_mm = 215.0;
  double ray_y_mm = 215.0;
  double rotation_deg = 0.0;  // field rotation, positive clockwise on screen
  // Distance from the central ray to each blade edge's geometric projection, along the
  // field axes, indexed by Side. A large value puts the blade beyond the receptor.
  std::array<double, 4> edge_mm = {100.0, 100.0, 120.0, 120.0};
  double blade_transmission = 0.01;   // leakage through the lead
  double off_focus_fraction = 0.05;   // share of the output from the extra-focal region
  double off_focus_size_mm = 20.0;    // apparent extent of the extra-focal source

  // Beam and detector.
  double kvp = 75.0;
  double mas = 10.0;
  double tube_output_ugy_per_mas_at_1m = 50.0;  // from memory, typical 40-70 at 70-80 kVp
  double heel_strength = 0.15;   // relative fall-off across +-15 degrees towards the anode
  double anode_angle_deg = 90.0; // direction on screen the anode side points to (90 = down)
  bool grid = true;              // anti-scatter grid
  double scatter_scale = 1.0;    // multiplies the modelled scatter
  double detector_blur_mm = 0.15;
  double gain_variation = 0.01;  // rms of the residual gain pattern
  double electronic_noise = 2.0; // rms, in stored-value units of the raw image

  // Anatomy placement: centre (detector plane), rotation, scale relative to an average adult.
  double anatomy_x_mm = 215.0;
  double anatomy_y_mm = 215.0;
  double anatomy_rotation_deg = 0.0;
  double anatomy_scale = 1.0;
  bool laterality_right = true;

  // Extras.
  bool marker = true;            // lead "L"/"R" marker near a field edge
  bool implant = false;
  bool shield = false;           // lead shield across a field edge
  bool double_exposure = false;  // second field on the other half of the plate
  std::array<SynthSideCut, 4> blank;  // electronic mask per image side (left, right, top, bottom)
  std::array<SynthSideCut, 4> crop;   // crop per image side
  float blank_value = 0.0f;      // stored value of the masked area (processed scale 0..1)

  // Declared collimation: "" none, "collimator", "shutter". Offsets (mm, outward positive)
  // are the deliberate miscalibration per Side, recorded in the truth notes.
  std::string declared;
  std::array<double, 4> declared_offset_mm = {0.0, 0.0, 0.0, 0.0};

  // Output.
  SynthOutput output = SynthOutput::kRaw;   // kRaw or kProcessed after RandomScenario
  bool monochrome1 = false;
  int bits_stored = 14;
  bool signed_pixels = false;
  double rescale_slope = 1.0;
  double rescale_intercept = 0.0;
  TransferSyntax syntax = TransferSyntax::kExplicitLittle;
  bool noise = true;

  // Header identity and context (fictional).
  std::string patient_name;   // SYNTH^PATIENTnnnn
  std::string patient_id;
  std::string operator_code;  // RT-nn
  std::string station;        // XR-ROOM-n
  std::string institution = "Synthetic Teaching Hospital (fictional)";
  std::string protocol;
  std::string study_date;     // YYYYMMDD
  double target_exposure_index = 400.0;
};

struct SynthImage {
  RadiographHeader header;  // every attribute that the file carries
  StoredPixels stored;      // what is written to Pixel Data
  Image pixels;             // reader convention: larger = more radiation
  bool linear = false;      // pixels proportional to detector air kerma (raw images)
  ImageRecord truth;        // exact geometric truth, same schema as the measurement
  std::string situation;    // SynthSituationName of the scenario
  std::string name;         // file stem, e.g. "synth-00042"
  // Extra truth not in the record schema.
  double field_area_unclipped_mm2 = 0.0;  // whole beam at the detector plane (for KAP)
  double air_kerma_detector_mgy = 0.0;    // free-in-air kerma at the detector, central ray
  std::array<double, 2> penumbra_mm{};    // P = f (SID - d) / d, left/right pair, top/bottom
  // The part of the image not blanked electronically (the whole image when nothing is):
  // a detector can only see the field there.
  Polygon unmasked_px;
  // The other field of a double exposure, clipped to the image (either field is a right answer
  // for a detector; which one came first cannot be told from the pixels).
  std::optional<Polygon> second_field_px;
};

// Draws a scenario; the same (seed, index, options) always gives the same scenario.
SynthScenario RandomScenario(uint64_t seed, int index, const SynthOptions& options = {});

// Renders a scenario. Deterministic: noise is drawn from a generator seeded by the scenario.
SynthImage Generate(const SynthScenario& scenario);

// The truth alone (cheap: no pixels rendered). Generate() fills SynthImage::truth with it.
ImageRecord ComputeTruth(const SynthScenario& scenario);

// Penumbra width at the detector, P = f (SID - d) / d (Bushberg et al., The Essential
// Physics of Medical Imaging): f focal spot, d source-to-blade distance.
double GeometricPenumbraMm(double focal_spot_mm, double sid_mm, double blade_distance_mm);

// The true field (detector plane) as a polygon in image pixel coordinates, not clipped.
Polygon TrueFieldPolygonPx(const SynthScenario& scenario);

// ---- Batches on disk --------------------------------------------------------------------

struct SynthBatchOptions {
  std::filesystem::path out_dir;
  int count = 100;
  uint64_t seed = 1;
  SynthOptions image;
  bool clinic = false;   // a fictional clinic's three months of exams (docs/synth.md)
  int threads = 0;       // 0 = hardware concurrency
  bool write_png = false;  // an 8-bit preview beside each file
};

struct SynthBatchResult {
  int written = 0;
  std::vector<Error> errors;  // per image; never stops the batch
};

// Writes <name>.dcm and <name>.truth.json per image plus truth.jsonl and manifest.json.
// `progress` (optional) is called with (done, total) from the calling thread.
SynthBatchResult WriteSynthBatch(const SynthBatchOptions& options,
                                 const std::function<void(int, int)>& progress = {});

// The clinic's scenario for exam `index` (deterministic in seed, index).
SynthScenario ClinicScenario(uint64_t seed, int index, const SynthOptions& options = {});

}  // namespace beamtrim
