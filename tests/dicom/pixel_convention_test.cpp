// The pixel convention of docs/dicom.md: modality value (PS3.3 C.11.1.1.2, m = slope * stored
// + intercept) for MONOCHROME2, inverted within the representable range for MONOCHROME1
// (PS3.3 C.7.6.3.1.2: minimum value is white). Inputs are synthetic ground truth.
#include <doctest/doctest.h>

#include "dicom/test_util.h"

using namespace beamtrim;
using beamtrim::test::MakeHeader;
using beamtrim::test::MakePixels;
using beamtrim::test::TempDir;

TEST_CASE("RescaleSlopeAndInterceptAreApplied") {
  TempDir dir("rescale");
  StoredPixels px = MakePixels(30, 20, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  h.rescale_slope = 0.5;
  h.rescale_intercept = -100.0;
  std::filesystem::path f = dir / "r.dcm";
  REQUIRE(WriteRadiograph(h, px, f).ok());
  Result<Radiograph> r = ReadRadiograph(f);
  REQUIRE_MESSAGE(r.ok(), r.error().ToString());
  for (size_t i : {size_t{0}, size_t{123}, size_t{599}}) {
    CHECK(r->pixels.data()[i] == doctest::Approx(0.5 * px.values[i] - 100.0));
  }
}

TEST_CASE("PixelDirectionFollowsSignThenPhotometricInterpretation") {
  // PS3.3 C.7.6.3.1.2: MONOCHROME1 displays the minimum white, MONOCHROME2 black. White on
  // a radiograph = little radiation. Pixel Intensity Relationship Sign (0028,1041) -1 =
  // higher values mean less X-ray intensity (PS3.3 DX Image module).
  TempDir dir("direction");
  StoredPixels px = MakePixels(30, 20, 12, false);
  struct Case {
    const char* photometric;
    int sign;
    const char* intent;
    bool inverted;
  };
  const Case cases[] = {
      {"MONOCHROME1", 0, "FOR PRESENTATION", false},  // low = white = little radiation
      {"MONOCHROME2", 0, "FOR PRESENTATION", true},   // bone bright: mirror
      {"MONOCHROME2", 0, "FOR PROCESSING", false},    // detector signal
      {"MONOCHROME2", -1, "FOR PROCESSING", true},    // the sign decides
      {"MONOCHROME1", -1, "FOR PRESENTATION", true},
      {"MONOCHROME2", 1, "FOR PRESENTATION", false},
  };
  int n = 0;
  for (const Case& c : cases) {
    RadiographHeader h = MakeHeader(px, 16, 12, false);
    h.photometric_interpretation = c.photometric;
    h.pixel_intensity_relationship_sign = c.sign;
    h.presentation_intent_type = c.intent;
    std::filesystem::path f = dir / (std::to_string(n++) + ".dcm");
    REQUIRE(WriteRadiograph(h, px, f).ok());
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    CAPTURE(n);
    for (size_t i : {size_t{0}, size_t{321}, size_t{599}}) {
      double expect = c.inverted ? 4095.0 - px.values[i] : px.values[i];  // 0 + 4095 - v
      CHECK(r->pixels.data()[i] == doctest::Approx(expect));
    }
  }
}

TEST_CASE("MirroredSignedRescaledDataKeepsTheModalityRange") {
  // Signed 12-bit, slope 2, intercept 10: modality range [-4086, 4104]; mirrored value is
  // -4086 + 4104 - m (docs/dicom.md).
  TempDir dir("mirror");
  StoredPixels sp = MakePixels(30, 20, 12, true);
  RadiographHeader sh = MakeHeader(sp, 16, 12, true);
  sh.pixel_intensity_relationship_sign = -1;
  sh.rescale_slope = 2.0;
  sh.rescale_intercept = 10.0;
  REQUIRE(WriteRadiograph(sh, sp, dir / "m.dcm").ok());
  Result<Radiograph> s = ReadRadiograph(dir / "m.dcm");
  REQUIRE_MESSAGE(s.ok(), s.error().ToString());
  double lo = 2.0 * -2048 + 10.0, hi = 2.0 * 2047 + 10.0;
  for (size_t i : {size_t{0}, size_t{321}, size_t{599}}) {
    CHECK(s->pixels.data()[i] == doctest::Approx(lo + hi - (2.0 * sp.values[i] + 10.0)));
  }
  CHECK_FALSE(s->linear);
}

TEST_CASE("LinearFlagFollowsTheDocumentedRule") {
  TempDir dir("linear");
  StoredPixels px = MakePixels(16, 16, 12, false);
  struct Case {
    const char* intent;
    const char* relationship;
    const char* photometric;
    bool linear;
  };
  const Case cases[] = {
      {"FOR PROCESSING", "", "MONOCHROME2", true},
      {"FOR PRESENTATION", "LIN", "MONOCHROME2", true},
      {"FOR PROCESSING", "LOG", "MONOCHROME2", false},
      {"FOR PRESENTATION", "", "MONOCHROME2", false},
      {"FOR PROCESSING", "LIN", "MONOCHROME1", true},  // MONOCHROME1 is not mirrored
      {"FOR PRESENTATION", "LOG", "MONOCHROME1", false},
  };
  int n = 0;
  for (const Case& c : cases) {
    RadiographHeader h = MakeHeader(px, 16, 12, false);
    h.presentation_intent_type = c.intent;
    h.pixel_intensity_relationship = c.relationship;
    h.photometric_interpretation = c.photometric;
    h.pixel_intensity_relationship_sign = 0;
    std::filesystem::path f = dir / (std::to_string(n++) + ".dcm");
    REQUIRE(WriteRadiograph(h, px, f).ok());
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    CAPTURE(n);
    CHECK(r->linear == c.linear);
  }
}

TEST_CASE("MultiFrameAnalysesTheFirstFrameWithANote") {
  // Built with DCMTK: three frames of 16 x 12, each frame a different ramp offset.
  TempDir dir("multi");
  for (E_TransferSyntax xfer : {EXS_LittleEndianExplicit, EXS_RLELossless}) {
    DcmFileFormat ff;
    DcmDataset& ds = *ff.getDataset();
    beamtrim::test::PutMinimalDx(ds, 12, 16);
    ds.putAndInsertString(DCM_NumberOfFrames, "3");
    std::vector<Uint16> v(16 * 12 * 3);
    for (size_t i = 0; i < v.size(); ++i) v[i] = static_cast<Uint16>(i / 192 * 1000 + i % 192);
    ds.putAndInsertUint16Array(DCM_PixelData, v.data(), static_cast<unsigned long>(v.size()));
    RegisterDicomCodecs();
    if (xfer != EXS_LittleEndianExplicit) REQUIRE(ds.chooseRepresentation(xfer, nullptr).good());
    std::filesystem::path f = dir / (std::to_string(static_cast<int>(xfer)) + ".dcm");
    REQUIRE(beamtrim::test::SaveDcmtk(ff, f, xfer));
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    CHECK(r->header.number_of_frames == 3);
    CHECK(r->pixels.at(0, 0) == 0.0f);
    CHECK(r->pixels.at(15, 11) == 191.0f);  // still frame 1 (frame 2 starts at 1000)
    bool noted = false;
    for (const std::string& n : r->notes) noted |= n == "multi-frame: first of 3 frames analysed";
    CHECK(noted);
  }
}

TEST_CASE("ColourImageIsSkippedAsUnsupported") {
  TempDir dir("colour");
  DcmFileFormat ff;
  DcmDataset& ds = *ff.getDataset();
  beamtrim::test::PutMinimalDx(ds, 8, 8);
  ds.putAndInsertUint16(DCM_SamplesPerPixel, 3);
  ds.putAndInsertString(DCM_PhotometricInterpretation, "RGB");
  ds.putAndInsertUint16(DCM_PlanarConfiguration, 0);
  ds.putAndInsertUint16(DCM_BitsAllocated, 8);
  ds.putAndInsertUint16(DCM_BitsStored, 8);
  ds.putAndInsertUint16(DCM_HighBit, 7);
  std::vector<Uint8> rgb(8 * 8 * 3, 100);
  ds.putAndInsertUint8Array(DCM_PixelData, rgb.data(), static_cast<unsigned long>(rgb.size()));
  std::filesystem::path f = dir / "rgb.dcm";
  REQUIRE(beamtrim::test::SaveDcmtk(ff, f));
  Result<Radiograph> r = ReadRadiograph(f);
  REQUIRE_FALSE(r.ok());
  CHECK(r.error().kind == ErrorKind::kUnsupported);
  CHECK(r.error().ToString().find("rgb.dcm") != std::string::npos);
  CHECK(r.error().attribute.find("(0028,0002)") != std::string::npos);
  CHECK(r.error().reason.find("colour") != std::string::npos);
}

TEST_CASE("NonProjectionModalitiesAreSkippedAsUnsupported") {
  TempDir dir("ct");
  StoredPixels px = MakePixels(16, 16, 12, false);
  for (const char* modality : {"CT", "MR", "US", "NM", "PT"}) {
    RadiographHeader h = MakeHeader(px, 16, 12, false);
    h.modality = modality;
    std::filesystem::path f = dir / (std::string(modality) + ".dcm");
    REQUIRE(WriteRadiograph(h, px, f).ok());
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_FALSE(r.ok());
    CHECK(r.error().kind == ErrorKind::kUnsupported);
    CHECK(r.error().attribute.find("(0008,0060)") != std::string::npos);
    CHECK(r.error().reason.find(modality) != std::string::npos);
  }
  for (const char* modality : {"DX", "CR", "RG"}) {  // projection radiography is accepted
    RadiographHeader h = MakeHeader(px, 16, 12, false);
    h.modality = modality;
    std::filesystem::path f = dir / (std::string(modality) + ".dcm");
    REQUIRE(WriteRadiograph(h, px, f).ok());
    CHECK(ReadRadiograph(f).ok());
  }
}
