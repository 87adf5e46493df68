// DICOM writing of DX/CR objects, used by the synthetic generator and by tests that need a
// file in a given transfer syntax. Thread-safe (no shared state beyond registered codecs).
#pragma once

#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/status.h"

namespace beamtrim {

enum class TransferSyntax {
  kImplicitLittle,
  kExplicitLittle,
  kExplicitBig,
  kDeflated,
  kRle,
  kJpegBaseline,   // 8-bit lossy (process 1)
  kJpegExtended,   // 12-bit lossy (process 2/4)
  kJpegLossless,   // process 14 SV1
  kJpegLsLossless,
  kJpegLsNearLossless,
  kJpeg2000Lossless,
  kJpeg2000,       // lossy
};

const char* TransferSyntaxName(TransferSyntax syntax);
const char* TransferSyntaxUid(TransferSyntax syntax);
std::vector<TransferSyntax> AllTransferSyntaxes();

// Stored pixel values, one frame, unsigned or signed integers as the header declares
// (bits_allocated 8 or 16, bits_stored, pixel_representation, photometric interpretation).
struct StoredPixels {
  int width = 0;
  int height = 0;
  std::vector<int32_t> values;  // row-major, within the range of bits_stored
};

struct WriteOptions {
  TransferSyntax syntax = TransferSyntax::kExplicitLittle;
  bool with_meta_header = true;  // false writes a bare data set (implicit little endian only)
  int lossy_quality = 90;        // JPEG quality / JPEG 2000 compression hint
};

// Writes the header attributes that are set plus the pixels. The header's rows/columns/bits
// must match `pixels`. Errors name the file.
Status WriteRadiograph(const RadiographHeader& header, const StoredPixels& pixels,
                       const std::filesystem::path& file, const WriteOptions& options = {});

// Writes a DICOMDIR in `folder` that lists the given files (relative to `folder`).
Status WriteDicomdir(const std::filesystem::path& folder,
                     const std::vector<std::filesystem::path>& files);

}  // namespace beamtrim
