// Fuzz target: the whole per-image measurement (reader, field detection, metrics) on small
// images must always produce a record, never crash or hang.
#include <cstddef>
#include <cstdint>

#include "beamtrim/measure.h"
#include "fuzz_common.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  static const beamtrim::Measurer measurer = [] {
    beamtrim::MeasureOptions options;
    options.read.max_pixels = 1'000'000;
    return beamtrim::Measurer::Create(options).value();
  }();
  beamtrim::ImageRecord record = measurer.MeasureFile(beamtrim::fuzz::WriteScratch(data, size));
  if (record.status != beamtrim::RecordStatus::kOk && record.reason.empty()) __builtin_trap();
  return 0;
}
