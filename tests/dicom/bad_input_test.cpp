// Bad input: each case must give an Error naming the file and, where there is one, the
// attribute at fault; never a crash and never an empty image. Inputs are synthetic.
#include <doctest/doctest.h>

#include <fstream>

#include "dicom/test_util.h"

using namespace beamtrim;
using beamtrim::test::MakeHeader;
using beamtrim::test::MakePixels;
using beamtrim::test::TempDir;

namespace {

// The error must name the file (by its file name) and mention `attribute` when given.
void CheckError(const Result<Radiograph>& r, const std::filesystem::path& f,
                const std::string& attribute = {}) {
  REQUIRE_FALSE(r.ok());
  std::string text = r.error().ToString();
  CAPTURE(text);
  CHECK(text.find(f.filename().string()) != std::string::npos);
  CHECK_FALSE(r.error().reason.empty());
  if (!attribute.empty()) CHECK(r.error().attribute.find(attribute) != std::string::npos);
}

std::filesystem::path WriteValid(const TempDir& dir, const std::string& name,
                                 TransferSyntax syntax = TransferSyntax::kExplicitLittle) {
  StoredPixels px = MakePixels(64, 48, 12, false);
  std::filesystem::path f = dir / name;
  WriteOptions o;
  o.syntax = syntax;
  REQUIRE(WriteRadiograph(MakeHeader(px, 16, 12, false), px, f, o).ok());
  return f;
}

}  // namespace

TEST_CASE("MissingFileIsNotFound") {
  TempDir dir("missing");
  Result<Radiograph> r = ReadRadiograph(dir / "nothing.dcm");
  CheckError(r, dir / "nothing.dcm");
  CHECK(r.error().kind == ErrorKind::kNotFound);
}

TEST_CASE("NonDicomFileIsRejected") {
  TempDir dir("notdicom");
  std::filesystem::path f = dir / "notes.txt";
  std::ofstream(f) << "This is a plain text file, not a radiograph.\n";
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f);
  CHECK(r.error().kind == ErrorKind::kNotDicom);
  CHECK_FALSE(LooksLikeDicom(f));
}

TEST_CASE("TruncatedFileIsRejectedAtEveryOffset") {
  // Cut inside the preamble, the meta header, the data set header and the pixel data.
  TempDir dir("trunc");
  for (TransferSyntax syntax : {TransferSyntax::kExplicitLittle, TransferSyntax::kRle,
                                TransferSyntax::kJpegLsLossless, TransferSyntax::kJpeg2000Lossless}) {
    std::filesystem::path full = WriteValid(dir, std::string(TransferSyntaxName(syntax)) + ".dcm", syntax);
    std::vector<char> bytes = beamtrim::test::ReadBytes(full);
    size_t n = bytes.size();
    for (size_t cut : {size_t{60}, size_t{140}, size_t{260}, size_t{600}, n / 2, n - 200, n - 2}) {
      if (cut >= n) continue;
      CAPTURE(cut);
      std::filesystem::path f = dir / ("cut" + std::to_string(cut) + TransferSyntaxName(syntax));
      beamtrim::test::WriteBytes(f, std::vector<char>(bytes.begin(), bytes.begin() + cut));
      Result<Radiograph> r = ReadRadiograph(f);
      CheckError(r, f);
    }
  }
}

TEST_CASE("MissingPixelDataIsRejected") {
  TempDir dir("nopixel");
  DcmFileFormat ff;
  beamtrim::test::PutMinimalDx(*ff.getDataset(), 32, 32);
  std::filesystem::path f = dir / "nopixel.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff, f));
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f, "(7FE0,0010)");
  CHECK(r.error().kind == ErrorKind::kMalformed);
  ReadOptions header_only;  // the header alone is still readable
  header_only.header_only = true;
  CHECK(ReadRadiograph(f, header_only).ok());
}

TEST_CASE("UnsupportedTransferSyntaxUidIsRejected") {
  // Replace the meta header's 1.2.840.10008.1.2.1 by the unassigned 1.2.840.10008.1.2.7
  // (same length, so the file stays well formed).
  TempDir dir("syntax");
  std::filesystem::path full = WriteValid(dir, "ok.dcm");
  std::vector<char> bytes = beamtrim::test::ReadBytes(full);
  std::string text(bytes.begin(), bytes.end());
  std::string uid("1.2.840.10008.1.2.1\0", 20);
  size_t at = text.find(uid);
  REQUIRE(at != std::string::npos);
  REQUIRE(at < 400);  // inside the meta header
  bytes[at + 18] = '7';
  std::filesystem::path f = dir / "unknown-syntax.dcm";
  beamtrim::test::WriteBytes(f, bytes);
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f, "(0002,0010)");
  CHECK(r.error().kind == ErrorKind::kUnsupported);
  CHECK(r.error().reason.find("1.2.840.10008.1.2.7") != std::string::npos);
}

TEST_CASE("PixelDataShorterThanRowsTimesColumnsIsRejected") {
  TempDir dir("short");
  DcmFileFormat ff;
  DcmDataset& ds = *ff.getDataset();
  beamtrim::test::PutMinimalDx(ds, 64, 64);
  beamtrim::test::PutRamp16(ds, 64 * 32);  // half the 64 x 64 x 16-bit frame
  std::filesystem::path f = dir / "short.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff, f));
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f, "(7FE0,0010)");
  CHECK(r.error().kind == ErrorKind::kMalformed);
}

TEST_CASE("ZeroRowsIsRejected") {
  TempDir dir("zero");
  DcmFileFormat ff;
  DcmDataset& ds = *ff.getDataset();
  beamtrim::test::PutMinimalDx(ds, 0, 64);
  beamtrim::test::PutRamp16(ds, 64);
  std::filesystem::path f = dir / "zero.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff, f));
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f, "(0028,0010)");
}

TEST_CASE("HugeDeclaredSizeIsRejectedBeforeAllocating") {
  // 65535 x 65535 x 16 bits would be 8 GiB; the file holds 8 KiB.
  TempDir dir("huge");
  DcmFileFormat ff;
  DcmDataset& ds = *ff.getDataset();
  beamtrim::test::PutMinimalDx(ds, 65535, 65535);
  beamtrim::test::PutRamp16(ds, 4096);
  std::filesystem::path f = dir / "huge.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff, f));
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f, "(0028,0010)");
  CHECK(r.error().reason.find("limit") != std::string::npos);

  // Under the pixel limit but larger than the file: the length check catches it.
  DcmFileFormat ff2;
  beamtrim::test::PutMinimalDx(*ff2.getDataset(), 4000, 4000);
  beamtrim::test::PutRamp16(*ff2.getDataset(), 4096);
  std::filesystem::path f2 = dir / "lying.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff2, f2));
  CheckError(ReadRadiograph(f2), f2, "(7FE0,0010)");

  ReadOptions tight;  // and the limit is the caller's
  tight.max_pixels = 1000;
  std::filesystem::path ok = WriteValid(dir, "ok.dcm");
  CheckError(ReadRadiograph(ok, tight), ok, "(0028,0010)");
}

TEST_CASE("BitsStoredAboveBitsAllocatedIsRejected") {
  TempDir dir("bits");
  DcmFileFormat ff;
  DcmDataset& ds = *ff.getDataset();
  beamtrim::test::PutMinimalDx(ds, 8, 8);
  ds.putAndInsertUint16(DCM_BitsStored, 17);
  beamtrim::test::PutRamp16(ds, 64);
  std::filesystem::path f = dir / "bits.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff, f));
  CheckError(ReadRadiograph(f), f, "(0028,0101)");
}

TEST_CASE("DeeplyNestedSequencesAreRefusedBeforeParsing") {
  // 6000 nested sequences of undefined length (explicit VR LE: tag, "SQ", 2 reserved bytes,
  // FFFFFFFF; then an Item FFFE,E000 of undefined length, PS3.5 7.5). DCMTK would recurse
  // once per level; the reader refuses the file up front instead of exhausting the stack.
  TempDir dir("nest");
  std::filesystem::path full = WriteValid(dir, "ok.dcm");
  std::vector<char> bytes = beamtrim::test::ReadBytes(full);
  const char level[] = {'\x08', '\x00', '\x15', '\x11', 'S', 'Q', '\0', '\0',
                        '\xFF', '\xFF', '\xFF', '\xFF', '\xFE', '\xFF', '\x00', '\xE0',
                        '\xFF', '\xFF', '\xFF', '\xFF'};
  for (int i = 0; i < 6000; ++i) bytes.insert(bytes.end(), level, level + sizeof level);
  std::filesystem::path f = dir / "nested.dcm";
  beamtrim::test::WriteBytes(f, bytes);
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f, "(FFFE,E000)");
  CHECK(r.error().kind == ErrorKind::kMalformed);
}

TEST_CASE("PixelDataLongerThanRowsTimesColumnsIsRejected") {
  // PS3.5 8.1.1 / 7.1.1: native pixel data is exactly rows x columns x bits allocated / 8
  // per frame (plus one pad byte when odd). Extra data means the header is wrong.
  TempDir dir("long");
  DcmFileFormat ff;
  DcmDataset& ds = *ff.getDataset();
  beamtrim::test::PutMinimalDx(ds, 16, 16);
  beamtrim::test::PutRamp16(ds, 16 * 32);
  std::filesystem::path f = dir / "long.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff, f));
  Result<Radiograph> r = ReadRadiograph(f);
  CheckError(r, f, "(7FE0,0010)");
  CHECK(r.error().reason.find("512") != std::string::npos);  // 16 x 16 x 2 bytes needed
}
