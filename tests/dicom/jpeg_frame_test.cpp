// The JPEG / JPEG-LS frame header reader and the reader's check of it against Rows and
// Columns. Layouts from ITU-T T.81 (JPEG) B.1.1 and B.2.2 and ITU-T T.87 (JPEG-LS) C.2.2;
// real streams come from the IJG and CharLS encoders through DCMTK.
#include <doctest/doctest.h>

#include <vector>

#include <dcmtk/dcmdata/dcpixel.h>
#include <dcmtk/dcmdata/dcpixseq.h>
#include <dcmtk/dcmdata/dcpxitem.h>

#include "dicom/jpeg_frame.h"
#include "test_util.h"

using namespace beamtrim;
using namespace beamtrim::test;
using beamtrim::dicom_internal::ReadJpegFrameSize;

namespace {

using Bytes = std::vector<uint8_t>;

// SOI, an APP0 segment, a frame header with marker `sof` for X x Y, then SOS (T.81 B.2).
Bytes Stream(uint8_t sof, int columns, int lines) {
  // clang-format off
  Bytes b = {0xFF, 0xD8,                                            // SOI
             0xFF, 0xE0, 0x00, 0x06, 'a', 'b', 'c', 'd',            // APP0, Lp = 6
             0xFF, sof,  0x00, 0x0B, 0x0C,                          // SOFn, Lf = 11, P = 12
             static_cast<uint8_t>(lines >> 8), static_cast<uint8_t>(lines),
             static_cast<uint8_t>(columns >> 8), static_cast<uint8_t>(columns),
             0x01, 0x01, 0x11, 0x00,                                // Nf = 1: C1 H1V1 Tq0
             0xFF, 0xDA, 0x00, 0x08, 0x01, 0x01, 0x00, 0x00, 0x3F, 0x00};  // SOS
  // clang-format on
  return b;
}

// The first fragment of frame 1 (item 1 of the pixel sequence) of a file written by DCMTK.
Bytes FirstFragment(const std::filesystem::path& file) {
  DcmFileFormat ff;
  REQUIRE(ff.loadFile(file.string().c_str()).good());
  DcmElement* element = nullptr;
  REQUIRE(ff.getDataset()->findAndGetElement(DCM_PixelData, element).good());
  auto* pixel = static_cast<DcmPixelData*>(element);
  E_TransferSyntax xfer = EXS_Unknown;
  const DcmRepresentationParameter* param = nullptr;
  pixel->getOriginalRepresentationKey(xfer, param);
  DcmPixelSequence* seq = nullptr;
  REQUIRE(pixel->getEncapsulatedRepresentation(xfer, param, seq).good());
  DcmPixelItem* item = nullptr;
  Uint8* data = nullptr;
  REQUIRE(seq->getItem(item, 1).good());
  REQUIRE(item->getUint8Array(data).good());
  return Bytes(data, data + item->getLength());
}

}  // namespace

TEST_CASE("JpegFrameHeaderGivesSamplesPerLineAndLines") {
  // T.81 B.2.2: after Lf and P come Y (lines) then X (samples per line), both 16-bit big endian.
  for (uint8_t sof : {0xC0, 0xC1, 0xC3, 0xF7}) {  // baseline, extended, lossless, JPEG-LS
    CAPTURE(int{sof});
    Bytes b = Stream(sof, 88, 2156);
    auto frame = ReadJpegFrameSize(b.data(), b.size());
    REQUIRE(frame.has_value());
    CHECK(frame->columns == 88);
    CHECK(frame->lines == 2156);
  }
}

TEST_CASE("JpegFillBytesAndTablesBeforeTheFrameHeaderAreSkipped") {
  Bytes b = Stream(0xC1, 300, 200);
  // T.81 B.1.1.2: any marker may be preceded by fill bytes FF. B.2.4.2: a DHT (FFC4) segment
  // shares the SOF range but is no frame header.
  Bytes dht = {0xFF, 0xFF, 0xFF, 0xC4, 0x00, 0x04, 0x00, 0x00};
  b.insert(b.begin() + 10, dht.begin(), dht.end());
  auto frame = ReadJpegFrameSize(b.data(), b.size());
  REQUIRE(frame.has_value());
  CHECK(frame->columns == 300);
  CHECK(frame->lines == 200);
}

TEST_CASE("JpegStreamsWithoutAReadableFrameHeaderGiveNothing") {
  Bytes good = Stream(0xC0, 10, 10);
  Bytes no_soi(good.begin() + 2, good.end());
  CHECK_FALSE(ReadJpegFrameSize(no_soi.data(), no_soi.size()).has_value());
  Bytes cut(good.begin(), good.begin() + 16);  // ends inside the frame header
  CHECK_FALSE(ReadJpegFrameSize(cut.data(), cut.size()).has_value());
  Bytes scan_first = {0xFF, 0xD8, 0xFF, 0xDA, 0x00, 0x08, 0x01, 0x01, 0x00, 0x00, 0x3F, 0x00};
  CHECK_FALSE(ReadJpegFrameSize(scan_first.data(), scan_first.size()).has_value());
  Bytes bad_length = good;
  bad_length[5] = 0x01;  // APP0 length 1: shorter than its own length field
  CHECK_FALSE(ReadJpegFrameSize(bad_length.data(), bad_length.size()).has_value());
  CHECK_FALSE(ReadJpegFrameSize(nullptr, 0).has_value());
}

TEST_CASE("FramesFromTheJpegEncodersGiveTheImageSize") {
  TempDir dir("jpegframe");
  struct Case {
    TransferSyntax syntax;
    int bits_allocated, bits_stored;
  };
  for (Case c :
       {Case{TransferSyntax::kJpegBaseline, 8, 8}, Case{TransferSyntax::kJpegExtended, 16, 12},
        Case{TransferSyntax::kJpegLossless, 16, 12},
        Case{TransferSyntax::kJpegLsLossless, 16, 12}}) {
    CAPTURE(static_cast<int>(c.syntax));
    StoredPixels p = MakePixels(37, 23, c.bits_stored, false);
    WriteOptions options;
    options.syntax = c.syntax;
    auto file = dir / "f.dcm";
    REQUIRE(WriteRadiograph(MakeHeader(p, c.bits_allocated, c.bits_stored, false), p, file, options)
                .ok());
    Bytes stream = FirstFragment(file);
    auto frame = ReadJpegFrameSize(stream.data(), stream.size());
    REQUIRE(frame.has_value());
    CHECK(frame->columns == 37);
    CHECK(frame->lines == 23);
  }
}

TEST_CASE("RowsThatDisagreeWithTheJpegFrameAreRejected") {
  // Found by fuzzing: Rows raised from 108 to 2156 over a 108-line JPEG frame read "ok", the
  // missing lines left as an empty buffer and measured as if exposed.
  TempDir dir("jpegrows");
  StoredPixels p = MakePixels(37, 23, 12, false);
  WriteOptions options;
  options.syntax = TransferSyntax::kJpegLossless;
  auto file = dir / "lossless.dcm";
  REQUIRE(WriteRadiograph(MakeHeader(p, 16, 12, false), p, file, options).ok());
  REQUIRE(ReadRadiograph(file).ok());  // as written, the sizes agree

  DcmFileFormat ff;
  REQUIRE(ff.loadFile(file.string().c_str()).good());
  REQUIRE(ff.getDataset()->putAndInsertUint16(DCM_Rows, 46).good());
  auto lying = dir / "lying.dcm";
  REQUIRE(SaveDcmtk(ff, lying, EXS_JPEGProcess14SV1));
  auto read = ReadRadiograph(lying);
  REQUIRE_FALSE(read.ok());
  CHECK(read.error().file == lying.string());
  CHECK(read.error().reason == "JPEG frame is 37 x 23 but Columns x Rows declare 37 x 46");
  CHECK(read.error().ToString().find("(7FE0,0010)") != std::string::npos);
}
