// The per-image measurement pipeline: read a DICOM file, detect the exposed field, find the
// anatomy, compute the metrics and the verdict, and return one ImageRecord. A Measurer is
// immutable after Create() and safe to share between threads. Bad input never throws: it
// becomes a record with status "error" or "skipped" and a reason naming the file.
#pragma once

#include <filesystem>
#include <memory>

#include "beamtrim/dicom.h"
#include "beamtrim/field.h"
#include "beamtrim/record.h"
#include "beamtrim/status.h"

namespace beamtrim {

class RuleSet;  // rules.h

struct MeasureOptions {
  ReadOptions read;
  FieldOptions field;
  // Rules file (JSON) for the verdicts; empty = the shipped defaults (docs/rules.md).
  std::filesystem::path rules_file;
};

class Measurer {
 public:
  // Loads the rules; errors name the rules file, line and key.
  static Result<Measurer> Create(const MeasureOptions& options);

  ImageRecord MeasureFile(const std::filesystem::path& file) const;
  ImageRecord MeasureRadiograph(const Radiograph& radiograph) const;

  const MeasureOptions& options() const { return options_; }

 private:
  MeasureOptions options_;
  std::shared_ptr<const RuleSet> rules_;
};

// Fills the record's identity and context from a header (no measurement).
void FillRecordContext(const Radiograph& radiograph, ImageRecord* record);

// The record of a file that could not be read: "skipped" when it is not a radiograph beamtrim
// measures (ErrorKind::kUnsupported), "error" otherwise, with the reason (the record already
// names the file). MeasureFile and the batch scan both use it.
ImageRecord UnreadableRecord(const std::filesystem::path& file, const Error& error);

}  // namespace beamtrim
