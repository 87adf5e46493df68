// The scan wired to the real DICOM reader and Measurer. Kept apart from the engine so the
// engine and its tests do not depend on the analysis layer being linked in.
#include <exception>
#include <thread>

#include "beamtrim/measure.h"
#include "beamtrim/scan.h"
#include "store/scan_internal.h"

namespace beamtrim {
namespace {

class DicomMeasurer : public ImageMeasurer {
 public:
  explicit DicomMeasurer(const Measurer& measurer) : measurer_(measurer) {}

  MeasuredImage Measure(const std::filesystem::path& file) const override {
    MeasuredImage out;
    // One read serves both the measurement and the identifiers that are hashed: the header
    // carries the accession number and study UID that ImageRecord deliberately lacks.
    auto radiograph = ReadRadiograph(file, measurer_.options().read);
    if (!radiograph) {
      // No second read: the error of this one is the reason (MeasureFile would read again).
      out.record = UnreadableRecord(file, radiograph.error());
      return out;
    }
    out.accession_number = radiograph->header.accession_number;
    out.study_instance_uid = radiograph->header.study_instance_uid;
    out.record = measurer_.MeasureRadiograph(*radiograph);
    if (out.record.file.empty()) out.record.file = file.string();
    return out;
  }

 private:
  Measurer measurer_;
};

std::vector<std::filesystem::path> Absolute(const std::vector<std::filesystem::path>& paths) {
  std::vector<std::filesystem::path> out;
  for (const auto& p : paths) {
    std::error_code ec;
    auto absolute = std::filesystem::absolute(p, ec);
    out.push_back(ec ? p : absolute.lexically_normal());
  }
  return out;
}

}  // namespace

std::unique_ptr<ImageMeasurer> MakeDicomMeasurer(const Measurer& measurer) {
  return std::make_unique<DicomMeasurer>(measurer);
}

Result<ScanSummary> Scan(const ScanOptions& options, ScanProgress& progress,
                         const std::atomic<bool>* stop) {
  if (Status s = options.Validate(); !s) return s.error();
  MeasureOptions measure_options;
  measure_options.rules_file = options.rules_file;
  auto measurer = Measurer::Create(measure_options);
  if (!measurer) return measurer.error();
  StoreOptions store_options;
  store_options.key_file = options.key_file;
  auto store = Store::Open(options.store_file, store_options);
  if (!store) return store.error();

  // Absolute paths make the file identity independent of the working folder.
  InputList inputs = FindDicomInputs(Absolute(options.inputs));
  auto dicom = MakeDicomMeasurer(*measurer);
  return store_internal::RunScan(inputs.files, std::move(inputs.problems), **store, *dicom,
                                 options, progress, stop);
}

}  // namespace beamtrim
