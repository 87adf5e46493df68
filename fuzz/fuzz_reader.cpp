// Fuzz target: the DICOM reader must return a value or an Error for any bytes, within bounded
// memory (ReadOptions::max_pixels keeps lying headers from allocating gigabytes).
#include <cstddef>
#include <cstdint>

#include "beamtrim/dicom.h"
#include "fuzz_common.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  beamtrim::ReadOptions options;
  options.max_pixels = 4'000'000;
  beamtrim::Result<beamtrim::Radiograph> result =
      beamtrim::ReadRadiograph(beamtrim::fuzz::WriteScratch(data, size), options);
  if (result.ok()) {
    // Touch every pixel so a short buffer behind the image shows up under ASan.
    const beamtrim::Image& image = result->pixels;
    volatile float sum = 0.0f;
    for (size_t i = 0; i < image.size(); ++i) sum = sum + image.data()[i];
  } else if (result.error().reason.empty()) {
    __builtin_trap();  // every error must say why
  }
  return 0;
}
