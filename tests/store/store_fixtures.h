// Helpers for the store tests: temporary folders and synthetic ImageRecords (synthetic ground
// truth: invented values for a fictional clinic, not measurements).
#pragma once

#include <unistd.h>

#include <atomic>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>

#include "beamtrim/record.h"
#include "beamtrim/scan.h"
#include "beamtrim/store.h"

namespace beamtrim::testing {

// A fresh folder under the system temp folder, removed at the end of the test.
class TempDir {
 public:
  TempDir() {
    static std::atomic<int> counter{0};
    path_ = std::filesystem::temp_directory_path() /
            ("beamtrim-store-test-" + std::to_string(::getpid()) + "-" +
             std::to_string(counter++) + "-" + std::to_string(std::random_device{}()));
    std::filesystem::create_directories(path_);
  }
  ~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  const std::filesystem::path& path() const { return path_; }
  std::filesystem::path operator/(const std::string& name) const { return path_ / name; }

 private:
  std::filesystem::path path_;
};

inline void WriteFile(const std::filesystem::path& file, const std::string& content) {
  std::ofstream out(file, std::ios::binary);
  out << content;
}

struct RecordSpec {
  std::string sop = "1.2.826.0.1.3680043.9.7777.1";
  RecordStatus status = RecordStatus::kOk;
  std::string reason;
  std::string operator_name = "RT-07";
  std::string station = "ROOM-2";
  std::string body_part = "CHEST";
  std::string view = "PA";
  std::string study_date = "20260305";
  std::string outcome = "acceptable";
  bool all_visible = true;
  bool clipped = false;
  bool blanked = false;
  std::optional<double> excess_fraction = 0.2;
  std::optional<double> excess_area_mm2 = 10000.0;
  std::optional<double> excess_area_patient_mm2 = 8000.0;
  std::optional<double> kap = 1.0;
  std::optional<double> avoidable_kap = 0.2;
};

inline ImageRecord MakeRecord(const RecordSpec& spec, const std::string& file = "") {
  ImageRecord r;
  r.file = file;
  r.sop_instance_uid = spec.sop;
  r.status = spec.status;
  r.reason = spec.reason;
  r.software_version = "test";
  r.context.modality = "DX";
  r.context.operator_name = spec.operator_name;
  r.context.station = spec.station;
  r.context.body_part = spec.body_part;
  r.context.view = spec.view;
  r.context.study_date = spec.study_date;
  if (spec.study_date.size() == 8) {
    r.context.month = spec.study_date.substr(0, 4) + "-" + spec.study_date.substr(4, 2);
  }
  if (spec.status != RecordStatus::kOk) return r;
  r.rows = r.columns = 100;
  FieldMeasurement field;
  for (Side s : kAllSides) {
    field.side(s).side = s;
    field.side(s).visible = spec.all_visible || s != Side::kTop;
  }
  field.blanked = spec.blanked;
  r.field = field;
  AnatomyMeasurement anatomy;
  anatomy.found = true;
  if (spec.clipped) anatomy.clipped_sides.push_back(Side::kLeft);
  r.anatomy = anatomy;
  ExcessMeasurement excess;
  excess.fraction_at_0mm = spec.excess_fraction;
  excess.area_mm2 = spec.excess_area_mm2;
  excess.area_patient_mm2 = spec.excess_area_patient_mm2;
  r.excess = excess;
  DoseMeasurement dose;
  dose.kap_dgy_cm2 = spec.kap;
  dose.avoidable_kap_dgy_cm2 = spec.avoidable_kap;
  r.dose = dose;
  Verdict verdict;
  verdict.outcome = spec.outcome;
  r.verdict = verdict;
  return r;
}

inline MeasuredImage MakeImage(const RecordSpec& spec, const std::string& file = "") {
  MeasuredImage image;
  image.record = MakeRecord(spec, file);
  image.accession_number = "ACC-" + spec.sop;
  image.study_instance_uid = spec.sop + ".0";
  return image;
}

}  // namespace beamtrim::testing
