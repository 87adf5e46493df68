// RLE Lossless decoding (DICOM PS3.5 Annex G), done here rather than by DCMTK: the DCMTK 3.6.7
// decoder reads past its input on a damaged segment table (found by fuzzing, kept as a
// regression in testdata/fuzz-regressions/). Every read below is bounds-checked.
#include <cstring>
#include <string>

#include "dicom/dicom_internal.h"

namespace beamtrim::dicom_internal {
namespace {

uint32_t ReadLe32(const uint8_t* p) {
  return static_cast<uint32_t>(p[0]) | (static_cast<uint32_t>(p[1]) << 8) |
         (static_cast<uint32_t>(p[2]) << 16) | (static_cast<uint32_t>(p[3]) << 24);
}

// PackBits (PS3.5 G.3.1): a header byte n; 0..127 copies the next n+1 bytes, -1..-127 repeats
// the next byte 1-n times, -128 does nothing. Decodes exactly `out_size` bytes.
bool UnpackSegment(const uint8_t* in, size_t in_size, uint8_t* out, size_t out_size) {
  size_t i = 0;
  size_t o = 0;
  while (o < out_size && i < in_size) {
    int n = static_cast<int8_t>(in[i++]);
    if (n >= 0) {
      size_t count = static_cast<size_t>(n) + 1;
      if (i + count > in_size || o + count > out_size) return false;
      std::memcpy(out + o, in + i, count);
      i += count;
      o += count;
    } else if (n != -128) {
      size_t count = static_cast<size_t>(1 - n);
      if (i >= in_size || o + count > out_size) return false;
      std::memset(out + o, in[i++], count);
      o += count;
    }
  }
  return o == out_size;
}

}  // namespace

Result<std::vector<uint8_t>> DecodeRleFrame(const uint8_t* data, size_t size, int rows,
                                            int columns, int bytes_per_sample) {
  constexpr size_t kHeader = 64;  // number of segments + 15 offsets, PS3.5 G.5
  if (size < kHeader) return MakeError(ErrorKind::kMalformed, "", "RLE frame shorter than its header");
  uint32_t segments = ReadLe32(data);
  if (segments != static_cast<uint32_t>(bytes_per_sample)) {
    return MakeError(ErrorKind::kMalformed, "",
                     "RLE header lists " + std::to_string(segments) + " segments, expected " +
                         std::to_string(bytes_per_sample) + " (one per byte of a sample)");
  }
  const size_t pixels = static_cast<size_t>(rows) * static_cast<size_t>(columns);
  std::vector<uint8_t> plane(pixels);
  std::vector<uint8_t> out(pixels * bytes_per_sample);
  for (uint32_t s = 0; s < segments; ++s) {
    size_t begin = ReadLe32(data + 4 + 4 * s);
    size_t end = s + 1 < segments ? ReadLe32(data + 4 + 4 * (s + 1)) : size;
    if (begin < kHeader || begin > end || end > size) {
      return MakeError(ErrorKind::kMalformed, "",
                       "RLE segment " + std::to_string(s + 1) + " offset lies outside the frame");
    }
    if (!UnpackSegment(data + begin, end - begin, plane.data(), plane.size())) {
      return MakeError(ErrorKind::kMalformed, "",
                       "RLE segment " + std::to_string(s + 1) + " does not decode to rows x columns bytes");
    }
    // Segment 1 holds the most significant bytes (PS3.5 G.2); native data is little endian.
    size_t byte_index = static_cast<size_t>(bytes_per_sample) - 1 - s;
    for (size_t i = 0; i < pixels; ++i) out[i * bytes_per_sample + byte_index] = plane[i];
  }
  return out;
}

}  // namespace beamtrim::dicom_internal
