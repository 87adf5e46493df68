// The sink that measures a spool file and records it in the store, through the same
// one-file entry point the batch scan offers to services (scan.h: MeasureAndStore).
#include <memory>

#include <spdlog/spdlog.h>

#include "beamtrim/measure.h"
#include "beamtrim/network.h"
#include "beamtrim/scan.h"
#include "beamtrim/store.h"

namespace beamtrim {
namespace {

bool IsRecorded(const Store& store, const std::filesystem::path& file) {
  Result<std::optional<StoredFile>> stored = store.Find(file.string());
  if (!stored.ok() || !stored->has_value()) return false;
  Result<FileIdentity> identity = StatFile(file);
  return identity.ok() && (*stored)->identity == identity.value();
}

}  // namespace

SpoolSink MakeStoreSink(Store& store, const Measurer& measurer) {
  std::shared_ptr<const ImageMeasurer> image_measurer = MakeDicomMeasurer(measurer);
  SpoolSink sink;
  sink.consume = [&store, image_measurer](const std::filesystem::path& file) -> Status {
    Result<ScanEvent> event = MeasureAndStore(store, *image_measurer, file);
    if (!event.ok()) return event.error();
    spdlog::info("recorded {} ({}{})", file.filename().string(), RecordStatusName(event->status),
                 event->duplicate ? ", duplicate" : event->already_stored ? ", already stored" : "");
    return Status::Ok();
  };
  sink.is_done = [&store](const std::filesystem::path& file) { return IsRecorded(store, file); };
  sink.has_instance = [&store](const std::string& sop_instance_uid) {
    Result<std::optional<std::string>> json = store.RecordJson(sop_instance_uid);
    return json.ok() && json->has_value();
  };
  return sink;
}

}  // namespace beamtrim
