// The sink that measures a spool file and records it in the store.
#include <spdlog/spdlog.h>

#include "beamtrim/dicom.h"
#include "beamtrim/measure.h"
#include "beamtrim/network.h"
#include "beamtrim/store.h"

namespace beamtrim {
namespace {

Status MeasureAndPut(Store& store, const Measurer& measurer, const std::filesystem::path& file) {
  Result<FileIdentity> identity = StatFile(file);
  if (!identity.ok()) return identity.error();
  MeasuredImage image;
  image.record = measurer.MeasureFile(file);
  // The two identifiers only feed the store's keyed hashes; they are not written as such.
  ReadOptions header_only;
  header_only.header_only = true;
  if (Result<Radiograph> header = ReadRadiograph(file, header_only); header.ok()) {
    image.accession_number = header->header.accession_number;
    image.study_instance_uid = header->header.study_instance_uid;
  }
  Result<PutOutcome> outcome = store.Put(image, identity.value());
  if (!outcome.ok()) return outcome.error();
  spdlog::info("recorded {} ({}, {})", file.filename().string(),
               RecordStatusName(image.record.status), PutOutcomeName(outcome.value()));
  return Status::Ok();
}

bool IsRecorded(const Store& store, const std::filesystem::path& file) {
  Result<std::optional<StoredFile>> stored = store.Find(file.string());
  if (!stored.ok() || !stored->has_value()) return false;
  Result<FileIdentity> identity = StatFile(file);
  return identity.ok() && (*stored)->identity == identity.value();
}

}  // namespace

SpoolSink MakeStoreSink(Store& store, const Measurer& measurer) {
  SpoolSink sink;
  sink.consume = [&store, &measurer](const std::filesystem::path& file) {
    return MeasureAndPut(store, measurer, file);
  };
  sink.is_done = [&store](const std::filesystem::path& file) { return IsRecorded(store, file); };
  sink.has_instance = [&store](const std::string& sop_instance_uid) {
    Result<std::optional<std::string>> json = store.RecordJson(sop_instance_uid);
    return json.ok() && json->has_value();
  };
  return sink;
}

}  // namespace beamtrim
