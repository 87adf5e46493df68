// beamtrim's own RLE Lossless decoder (PS3.5 Annex G).
#include <doctest/doctest.h>

#include <vector>

#include "dicom/dicom_internal.h"

using beamtrim::dicom_internal::DecodeRleFrame;

namespace {

std::vector<uint8_t> Frame(uint32_t segments, const std::vector<std::vector<uint8_t>>& packed) {
  std::vector<uint8_t> out(64, 0);
  auto put = [&out](size_t at, uint32_t v) {
    for (int k = 0; k < 4; ++k) out[at + k] = (v >> (8 * k)) & 0xff;
  };
  put(0, segments);
  for (size_t s = 0; s < packed.size(); ++s) {
    put(4 + 4 * s, static_cast<uint32_t>(out.size()));
    out.insert(out.end(), packed[s].begin(), packed[s].end());
  }
  return out;
}

}  // namespace

TEST_CASE("RlePackBitsWorkedExampleDecodes") {
  // The PackBits example of Apple Technical Note TN1023 (from memory), which PS3.5 G.3 adopts:
  // FE AA 02 80 00 2A FD AA 03 80 00 2A 22 F7 AA unpacks to 24 bytes.
  std::vector<uint8_t> packed = {0xFE, 0xAA, 0x02, 0x80, 0x00, 0x2A, 0xFD, 0xAA,
                                 0x03, 0x80, 0x00, 0x2A, 0x22, 0xF7, 0xAA};
  std::vector<uint8_t> expected = {0xAA, 0xAA, 0xAA, 0x80, 0x00, 0x2A, 0xAA, 0xAA,
                                   0xAA, 0xAA, 0x80, 0x00, 0x2A, 0x22, 0xAA, 0xAA,
                                   0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA, 0xAA};
  std::vector<uint8_t> frame = Frame(1, {packed});
  auto decoded = DecodeRleFrame(frame.data(), frame.size(), 4, 6, 1);
  REQUIRE(decoded.ok());
  CHECK(*decoded == expected);
}

TEST_CASE("RleSixteenBitSegmentsAreMostSignificantFirst") {
  // PS3.5 G.2: for 16-bit samples segment 1 holds the high bytes, segment 2 the low bytes.
  std::vector<uint8_t> high = {0x01, 0x12, 0x34};  // literal run of 2
  std::vector<uint8_t> low = {0xFF, 0x56};          // 0x56 twice
  std::vector<uint8_t> frame = Frame(2, {high, low});
  auto decoded = DecodeRleFrame(frame.data(), frame.size(), 1, 2, 2);
  REQUIRE(decoded.ok());
  CHECK(*decoded == std::vector<uint8_t>{0x56, 0x12, 0x56, 0x34});  // little-endian 0x1256, 0x3456
}

TEST_CASE("RleSegmentOffsetOutsideTheFrameIsRejected") {
  std::vector<uint8_t> frame = Frame(1, {{0x00, 0x07}});
  frame[4] = 0xF0;  // first segment offset far past the end
  frame[5] = 0xFF;
  auto decoded = DecodeRleFrame(frame.data(), frame.size(), 1, 1, 1);
  REQUIRE_FALSE(decoded.ok());
  CHECK(decoded.error().reason.find("offset") != std::string::npos);
}

TEST_CASE("RleRunPastTheOutputIsRejected") {
  std::vector<uint8_t> frame = Frame(1, {{0x81, 0x07}});  // 128 copies of 0x07 into 4 bytes
  auto decoded = DecodeRleFrame(frame.data(), frame.size(), 2, 2, 1);
  CHECK_FALSE(decoded.ok());
}

TEST_CASE("RleSegmentCountMustMatchTheSampleSize") {
  std::vector<uint8_t> frame = Frame(3, {{0x00, 1}, {0x00, 2}, {0x00, 3}});
  CHECK_FALSE(DecodeRleFrame(frame.data(), frame.size(), 1, 1, 2).ok());
}
