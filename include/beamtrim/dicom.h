// DICOM reading: projection radiographs (DX, CR) into a header value type and a float image.
// Reads Part 10 files (and raw data sets without a meta header where DCMTK can), in every
// transfer syntax found in archives (see docs/dicom.md). Pixels follow the Image convention:
// larger value = more radiation reached the detector. Functions are thread-safe after
// RegisterDicomCodecs() has run once (it is also called lazily, guarded).
// Results are value types owned by the caller. Errors name the file and the attribute.
#pragma once

#include <array>
#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/image.h"
#include "beamtrim/status.h"

namespace beamtrim {

// Edges of a declared rectangle (collimator or shutter), in pixel coordinates of the image
// as the DICOM module gives them: left/right are column numbers, upper/lower row numbers.
struct DeclaredEdges {
  double left = 0.0;
  double right = 0.0;
  double upper = 0.0;
  double lower = 0.0;
};

// Every attribute beamtrim uses; absent ones stay empty. Lengths in mm, dose in the DICOM unit.
struct RadiographHeader {
  // Identity (UIDs are not patient identifiers but are never written to shared outputs raw).
  std::string sop_instance_uid;
  std::string sop_class_uid;
  std::string study_instance_uid;
  std::string series_instance_uid;
  std::string accession_number;  // kept only in memory to derive a keyed hash
  std::string transfer_syntax_uid;

  // What and how.
  std::string modality;                  // (0008,0060)
  std::string presentation_intent_type;  // (0008,0068) FOR PROCESSING / FOR PRESENTATION
  std::string photometric_interpretation;  // (0028,0004)
  std::string pixel_intensity_relationship;  // (0028,1040) LIN / LOG / OTHER
  int pixel_intensity_relationship_sign = 0;  // (0028,1041) +1 / -1, 0 when absent
  int rows = 0;
  int columns = 0;
  int bits_allocated = 0;
  int bits_stored = 0;
  int high_bit = 0;
  int pixel_representation = 0;  // 0 unsigned, 1 signed
  int samples_per_pixel = 1;
  int number_of_frames = 1;
  double rescale_slope = 1.0;
  double rescale_intercept = 0.0;

  // Scale (mm). Spacing vectors are [row spacing, column spacing] as DICOM orders them.
  std::optional<std::array<double, 2>> imager_pixel_spacing;  // (0018,1164) detector plane
  std::optional<std::array<double, 2>> pixel_spacing;         // (0028,0030)
  std::string pixel_spacing_calibration_type;                 // (0028,0A02)
  std::optional<double> estimated_magnification;              // (0018,1114)
  std::optional<double> distance_source_to_detector_mm;       // (0018,1110) SID
  std::optional<double> distance_source_to_patient_mm;        // (0018,1111)

  // Receptor.
  std::optional<std::array<double, 2>> detector_active_dimensions_mm;  // (0018,7026)
  std::optional<std::array<double, 2>> field_of_view_origin;           // (0018,7030)
  std::optional<std::array<double, 2>> field_of_view_dimensions_mm;    // (0018,1149)
  std::optional<double> field_of_view_rotation_deg;                    // (0018,7032)
  std::string field_of_view_horizontal_flip;                           // (0018,7034)

  // Declared collimation and shutters.
  std::string collimator_shape;                   // (0018,1700)
  std::optional<DeclaredEdges> collimator_edges;  // (0018,1702..1708)
  std::string shutter_shape;                      // (0018,1600)
  std::optional<DeclaredEdges> shutter_edges;     // (0018,1602..1608)
  // Circular and polygonal outlines, in pixels of the image as the modules give them:
  // centres as [row, column]; polygons as row\column pairs, origin vertex first.
  std::optional<std::array<double, 2>> collimator_circle_center;  // (0018,1710)
  std::optional<double> collimator_circle_radius;                 // (0018,1712)
  std::vector<double> collimator_polygon;                         // (0018,1720)
  std::optional<std::array<double, 2>> shutter_circle_center;     // (0018,1610)
  std::optional<double> shutter_circle_radius;                    // (0018,1612)
  std::vector<double> shutter_polygon;                            // (0018,1620)

  // Dose and exposure.
  std::optional<double> area_dose_product_dgy_cm2;  // (0018,115E)
  std::optional<double> entrance_dose_mgy;          // (0040,8302)
  std::optional<double> kvp;                        // (0018,0060)
  std::optional<double> exposure_uas;               // (0018,1153)
  std::optional<double> exposure_index;             // (0018,1411)
  std::optional<double> target_exposure_index;      // (0018,1412)
  std::optional<double> deviation_index;            // (0018,1413)

  // Who, where, what, when.
  std::string operators_name;   // (0008,1070)
  std::string station_name;     // (0008,1010)
  std::string institution_name;
  std::string manufacturer;
  std::string body_part_examined;  // (0018,0015)
  std::string view_position;       // (0018,5101)
  std::string protocol_name;       // (0018,1030)
  std::string study_description;
  std::string study_date;          // YYYYMMDD
  std::string acquisition_date;
  std::string content_date;

  // Spacing at the detector plane [row, column], by the precedence in docs/dicom.md:
  // Imager Pixel Spacing; else Pixel Spacing, scaled back by the magnification factor when
  // its calibration type says it is calibrated to the patient plane.
  std::optional<std::array<double, 2>> DetectorSpacing() const;

  // Magnification M = SID / source-to-patient distance, else the estimated factor.
  std::optional<double> Magnification() const;

  // "YYYY-MM" from study date (else acquisition, else content date); empty when unknown.
  std::string StudyMonth() const;
};

// A decoded radiograph: header plus the first frame as a float image.
struct Radiograph {
  std::filesystem::path file;
  RadiographHeader header;
  Image pixels;                    // larger = more radiation
  bool linear = false;             // pixel values proportional to detector exposure (raw, LIN)
  std::vector<std::string> notes;  // e.g. "multi-frame: first of 3 frames analysed"
};

struct ReadOptions {
  // Refuse to allocate images larger than this many pixels (guards against lying headers).
  int64_t max_pixels = 120'000'000;
  // Read the header only; `pixels` stays empty.
  bool header_only = false;
};

// Registers DCMTK's decoders (RLE, JPEG, JPEG-LS). Idempotent and thread-safe.
void RegisterDicomCodecs();

// Reads one file. Errors: kNotFound, kUnreadable, kNotDicom, kMalformed, kUnsupported
// (non-projection modality, colour, unknown syntax), each naming the file and attribute.
Result<Radiograph> ReadRadiograph(const std::filesystem::path& file,
                                  const ReadOptions& options = {});

// The referenced image files of a DICOMDIR, resolved against its folder. Paths that would
// leave the DICOMDIR's folder are refused.
Result<std::vector<std::filesystem::path>> ListDicomdir(const std::filesystem::path& dicomdir);

// Inputs found by walking files, folders (recursively) and DICOMDIRs. Files listed by a
// DICOMDIR are taken from it; other files are kept when LooksLikeDicom() says so.
// Unreadable folders and broken DICOMDIRs are reported in `problems`, never fatal.
struct InputList {
  std::vector<std::filesystem::path> files;  // sorted, without duplicates
  std::vector<Error> problems;
};
InputList FindDicomInputs(const std::vector<std::filesystem::path>& paths);

// Cheap test on the first bytes: "DICM" at offset 128, or a plausible raw data set start.
bool LooksLikeDicom(const std::filesystem::path& file);

}  // namespace beamtrim
