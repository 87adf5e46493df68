// ImageRecord: everything beamtrim measured on one image, and its JSON form (one JSON Lines
// record, schema "beamtrim.image-record", documented in docs/record.md). The synthetic truth
// uses the same type and the same JSON, so tests compare like with like.
// Value type; the JSON functions are pure and thread-safe. No patient identifiers are kept:
// only the SOP Instance UID (needed to de-duplicate) and grouping attributes.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "beamtrim/field.h"
#include "beamtrim/metrics.h"
#include "beamtrim/status.h"

namespace beamtrim {

inline constexpr const char* kRecordSchema = "beamtrim.image-record";
// Bump on any change that breaks a reader; adding a key is not a break (docs/record.md).
inline constexpr int kRecordVersion = 1;

enum class RecordStatus { kOk, kSkipped, kError };
const char* RecordStatusName(RecordStatus status);

// Attributes used for grouping and for geometry, copied from the header.
struct RecordContext {
  std::string modality;
  std::string presentation_intent;
  std::string photometric;
  std::string operator_name;   // staff identity: pseudonymise before sharing
  std::string station;
  std::string body_part;
  std::string view;
  std::string protocol;
  std::string study_date;      // YYYYMMDD
  std::string month;           // YYYY-MM
  std::optional<double> sid_mm;
  std::optional<double> source_patient_mm;
  std::optional<double> magnification;
  bool linear = false;
  std::string transfer_syntax;
};

struct ImageRecord {
  std::string file;
  std::string sop_instance_uid;
  RecordStatus status = RecordStatus::kOk;
  std::string reason;  // why skipped / error, empty when ok
  int rows = 0;
  int columns = 0;
  std::optional<std::array<double, 2>> pixel_spacing_mm;  // [row, column], detector plane
  RecordContext context;

  std::optional<FieldMeasurement> field;
  std::optional<AnatomyMeasurement> anatomy;
  std::optional<ExcessMeasurement> excess;
  std::optional<ReceptorMeasurement> receptor;
  std::optional<DeclaredComparison> declared;
  std::optional<DoseMeasurement> dose;
  std::optional<Verdict> verdict;

  std::vector<std::string> notes;
  std::string software_version;
};

nlohmann::json ToJson(const ImageRecord& record);
// Parses a record written by ToJson (any version up to kRecordVersion). Errors name the key.
Result<ImageRecord> RecordFromJson(const nlohmann::json& json);

// One line of JSON Lines (no trailing newline).
std::string ToJsonLine(const ImageRecord& record);

}  // namespace beamtrim
