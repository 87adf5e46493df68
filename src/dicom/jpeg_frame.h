// The frame size a JPEG (ITU-T T.81) or JPEG-LS (ITU-T T.87) stream declares in its frame
// header, read without decoding, so the reader can compare it with Rows and Columns before
// DCMTK fills a buffer sized from the DICOM header. Pure function; thread-safe.
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>

namespace beamtrim::dicom_internal {

struct JpegFrameSize {
  int columns = 0;  // X, samples per line
  int lines = 0;    // Y, number of lines; 0 when a DNL marker gives it later (T.81 B.2.5)
};

// The first frame header (SOF0-SOF15 but DHT, JPG and DAC; or JPEG-LS SOF55) before the
// first scan, or nothing when the stream does not start with SOI or ends before one.
std::optional<JpegFrameSize> ReadJpegFrameSize(const uint8_t* data, size_t size);

}  // namespace beamtrim::dicom_internal
