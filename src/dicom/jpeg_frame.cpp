// Walks the marker segments of a JPEG / JPEG-LS stream up to the frame header.
#include "dicom/jpeg_frame.h"

namespace beamtrim::dicom_internal {
namespace {

// T.81 Table B.1: SOF markers are FFC0-FFCF except FFC4 (DHT), FFC8 (JPG), FFCC (DAC);
// T.87 Table C.1 adds FFF7 (SOF55, JPEG-LS) with the same frame header layout.
bool IsFrameHeader(uint8_t marker) {
  if (marker == 0xF7) return true;
  return marker >= 0xC0 && marker <= 0xCF && marker != 0xC4 && marker != 0xC8 && marker != 0xCC;
}

// T.81 B.1.1.3 and Table B.1: SOI, EOI, RST0-7 and TEM stand alone, without a length.
bool StandsAlone(uint8_t marker) {
  return marker == 0xD8 || marker == 0xD9 || (marker >= 0xD0 && marker <= 0xD7) || marker == 0x01;
}

unsigned Be16(const uint8_t* p) {
  return (unsigned{p[0]} << 8) | p[1];
}

}  // namespace

std::optional<JpegFrameSize> ReadJpegFrameSize(const uint8_t* data, size_t size) {
  if (data == nullptr || size < 4 || data[0] != 0xFF || data[1] != 0xD8) return std::nullopt;
  size_t at = 2;
  while (at + 1 < size) {
    if (data[at] != 0xFF) return std::nullopt;  // a segment must start with a marker
    uint8_t marker = data[at + 1];
    if (marker == 0xFF) {  // fill byte (T.81 B.1.1.2)
      ++at;
      continue;
    }
    at += 2;
    if (StandsAlone(marker)) continue;
    if (marker == 0xDA || at + 2 > size) return std::nullopt;  // a scan before any frame header
    unsigned length = Be16(data + at);                         // includes its own two bytes
    if (length < 2 || at + length > size) return std::nullopt;
    if (IsFrameHeader(marker)) {
      // Lf(2) P(1) Y(2) X(2) Nf(1)...
      if (length < 8) return std::nullopt;
      JpegFrameSize frame;
      frame.lines = static_cast<int>(Be16(data + at + 3));
      frame.columns = static_cast<int>(Be16(data + at + 5));
      return frame;
    }
    at += length;
  }
  return std::nullopt;
}

}  // namespace beamtrim::dicom_internal
