// The per-image pipeline: read -> detect the field -> metrics and verdict -> one record.
#include "beamtrim/measure.h"

#include <exception>

#include "beamtrim/metrics.h"
#include "beamtrim/rules.h"
#include "beamtrim/version.h"

namespace beamtrim {
ImageRecord UnreadableRecord(const std::filesystem::path& file, const Error& error) {
  ImageRecord record;
  record.file = file.string();
  record.status =
      error.kind == ErrorKind::kUnsupported ? RecordStatus::kSkipped : RecordStatus::kError;
  // The record already names the file; keep the attribute and the reason.
  Error without_file = error;
  without_file.file.clear();
  record.reason = without_file.ToString();
  record.software_version = kVersion;
  return record;
}

void FillRecordContext(const Radiograph& radiograph, ImageRecord* record) {
  const RadiographHeader& h = radiograph.header;
  record->file = radiograph.file.string();
  record->sop_instance_uid = h.sop_instance_uid;
  record->rows = h.rows;
  record->columns = h.columns;
  record->pixel_spacing_mm = h.DetectorSpacing();
  record->software_version = kVersion;
  RecordContext& c = record->context;
  c.modality = h.modality;
  c.presentation_intent = h.presentation_intent_type;
  c.photometric = h.photometric_interpretation;
  c.operator_name = h.operators_name;
  c.station = h.station_name;
  c.body_part = h.body_part_examined;
  c.view = h.view_position;
  c.protocol = h.protocol_name;
  c.study_date = !h.study_date.empty() ? h.study_date
                 : !h.acquisition_date.empty() ? h.acquisition_date
                                               : h.content_date;
  c.month = h.StudyMonth();
  c.sid_mm = h.distance_source_to_detector_mm;
  c.source_patient_mm = h.distance_source_to_patient_mm;
  c.magnification = h.Magnification();
  c.linear = radiograph.linear;
  c.transfer_syntax = h.transfer_syntax_uid;
  record->notes.insert(record->notes.end(), radiograph.notes.begin(), radiograph.notes.end());
}

Result<Measurer> Measurer::Create(const MeasureOptions& options) {
  Result<std::shared_ptr<const RuleSet>> rules = LoadRules(options.rules_file);
  if (!rules.ok()) return rules.error();
  Measurer measurer;
  measurer.options_ = options;
  measurer.rules_ = std::move(rules).value();
  return measurer;
}

ImageRecord Measurer::MeasureFile(const std::filesystem::path& file) const {
  try {
    Result<Radiograph> radiograph = ReadRadiograph(file, options_.read);
    if (!radiograph.ok()) return UnreadableRecord(file, radiograph.error());
    return MeasureRadiograph(radiograph.value());
  } catch (const std::exception& e) {
    // A bug or an exhausted resource must not stop a batch: record it against the file.
    return UnreadableRecord(file, MakeError(ErrorKind::kInternal, file.string(),
                                        std::string("internal error: ") + e.what()));
  }
}

ImageRecord Measurer::MeasureRadiograph(const Radiograph& radiograph) const {
  ImageRecord record;
  FillRecordContext(radiograph, &record);
  FieldContext context = FieldContextFromHeader(radiograph.header, radiograph.linear);
  record.field = DetectField(radiograph.pixels, context, options_.field);
  ComputeMetrics(radiograph, *record.field, *rules_, &record);
  return record;
}

}  // namespace beamtrim
