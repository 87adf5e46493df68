// Write-then-read round trips through every transfer syntax. The pixels are synthetic
// ground truth; lossless syntaxes must give them back exactly.
#include <doctest/doctest.h>

#include <cmath>
#include <thread>

#include <dcmtk/dcmjpeg/djrplol.h>

#include "dicom/test_util.h"

using namespace beamtrim;
using beamtrim::test::MakeHeader;
using beamtrim::test::MakePixels;
using beamtrim::test::TempDir;

namespace {

double MeanAbsDiff(const Image& img, const StoredPixels& p) {
  double sum = 0;
  for (size_t i = 0; i < p.values.size(); ++i) {
    sum += std::fabs(static_cast<double>(img.data()[i]) - p.values[i]);
  }
  return sum / static_cast<double>(p.values.size());
}

double MaxAbsDiff(const Image& img, const StoredPixels& p) {
  double worst = 0;
  for (size_t i = 0; i < p.values.size(); ++i) {
    worst = std::max(worst, std::fabs(static_cast<double>(img.data()[i]) - p.values[i]));
  }
  return worst;
}

bool IsLossy(TransferSyntax s) {
  return s == TransferSyntax::kJpegBaseline || s == TransferSyntax::kJpegExtended ||
         s == TransferSyntax::kJpegLsNearLossless || s == TransferSyntax::kJpeg2000;
}

int BitsFor(TransferSyntax s) {
  // T.81: process 1 is 8-bit, process 2/4 up to 12-bit; the others take 16.
  if (s == TransferSyntax::kJpegBaseline) return 8;
  if (s == TransferSyntax::kJpegExtended) return 12;
  return 14;
}

}  // namespace

TEST_CASE("EveryTransferSyntaxRoundTrips") {
  TempDir dir("rt");
  for (TransferSyntax syntax : AllTransferSyntaxes()) {
    std::string name = TransferSyntaxName(syntax);
    CAPTURE(name);
    int bits = BitsFor(syntax);
    StoredPixels px = MakePixels(96, 80, bits, false);
    RadiographHeader h = MakeHeader(px, bits > 8 ? 16 : 8, bits, false);
    std::filesystem::path f = dir / (std::string(TransferSyntaxName(syntax)) + ".dcm");
    WriteOptions o;
    o.syntax = syntax;
    Status w = WriteRadiograph(h, px, f, o);
    REQUIRE_MESSAGE(w.ok(), w.error().ToString());
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    CHECK(r->header.transfer_syntax_uid == TransferSyntaxUid(syntax));
    CHECK(r->pixels.width() == 96);
    CHECK(r->pixels.height() == 80);
    double diff = MaxAbsDiff(r->pixels, px);
    if (IsLossy(syntax)) {
      // Lossy tolerance (our choice, not a standard): at quality 90 the mean error stays
      // below 1 % of the stored range; the worst pixel, on the sharp field edge where the
      // DCT rings, below 20 %.
      double range = (1 << bits) - 1;
      double mean = MeanAbsDiff(r->pixels, px);
      MESSAGE(name << ": mean abs error " << mean << ", max " << diff << " of " << range);
      CHECK(mean <= 0.01 * range);
      CHECK(diff <= 0.20 * range);
      // ISO/IEC 14495-1: near-lossless bounds every sample error by NEAR (2 here).
      if (syntax == TransferSyntax::kJpegLsNearLossless) CHECK(diff <= 2.0);
    } else {
      CHECK(diff == 0.0);
    }
  }
}

TEST_CASE("LosslessSyntaxesKeepSignedAndUnsignedValuesExactly") {
  // Synthetic ground truth: signed 12-bit and unsigned 16-bit stored values.
  TempDir dir("signed");
  const TransferSyntax lossless[] = {
      TransferSyntax::kImplicitLittle, TransferSyntax::kExplicitLittle, TransferSyntax::kExplicitBig,
      TransferSyntax::kDeflated,       TransferSyntax::kRle,            TransferSyntax::kJpegLossless,
      TransferSyntax::kJpegLsLossless, TransferSyntax::kJpeg2000Lossless};
  for (bool is_signed : {true, false}) {
    // JPEG-LS writing refuses signed data (DCMTK's CharLS asserts on it): checked below.
    int bits = is_signed ? 12 : 16;
    for (TransferSyntax syntax : lossless) {
      std::string name = TransferSyntaxName(syntax);
      CAPTURE(name);
      CAPTURE(is_signed);
      StoredPixels px = MakePixels(64, 48, bits, is_signed, 11);
      RadiographHeader h = MakeHeader(px, 16, bits, is_signed);
      std::filesystem::path f = dir / (name + (is_signed ? "-s.dcm" : "-u.dcm"));
      WriteOptions o;
      o.syntax = syntax;
      Status w = WriteRadiograph(h, px, f, o);
      if (is_signed && syntax == TransferSyntax::kJpegLsLossless) {
        REQUIRE_FALSE(w.ok());
        CHECK(w.error().attribute.find("(0028,0103)") != std::string::npos);
        continue;
      }
      REQUIRE_MESSAGE(w.ok(), w.error().ToString());
      Result<Radiograph> r = ReadRadiograph(f);
      REQUIRE_MESSAGE(r.ok(), r.error().ToString());
      CHECK(r->header.pixel_representation == (is_signed ? 1 : 0));
      CHECK(MaxAbsDiff(r->pixels, px) == 0.0);
    }
  }
}

TEST_CASE("BitsStoredTenToSixteenRoundTripExactly") {
  TempDir dir("bits");
  for (int bits : {10, 12, 14, 16}) {
    for (TransferSyntax syntax : {TransferSyntax::kExplicitLittle, TransferSyntax::kRle,
                                  TransferSyntax::kJpeg2000Lossless}) {
      CAPTURE(bits);
      StoredPixels px = MakePixels(50, 40, bits, false, static_cast<unsigned>(bits));
      RadiographHeader h = MakeHeader(px, 16, bits, false);
      std::filesystem::path f = dir / (std::to_string(bits) + TransferSyntaxName(syntax) + ".dcm");
      WriteOptions o;
      o.syntax = syntax;
      REQUIRE(WriteRadiograph(h, px, f, o).ok());
      Result<Radiograph> r = ReadRadiograph(f);
      REQUIRE_MESSAGE(r.ok(), r.error().ToString());
      CHECK(r->header.bits_stored == bits);
      CHECK(MaxAbsDiff(r->pixels, px) == 0.0);
    }
  }
}

TEST_CASE("HighBitAboveBitsStoredIsHonoured") {
  // PS3.5 8.1.1: the stored bits end at High Bit. 12 bits stored with High Bit 15 puts each
  // value in the top 12 bits of the 16-bit word, i.e. raw word = value << 4.
  TempDir dir("highbit");
  StoredPixels px = MakePixels(40, 30, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  h.high_bit = 15;
  std::filesystem::path f = dir / "hb.dcm";
  REQUIRE(WriteRadiograph(h, px, f).ok());

  DcmFileFormat ff;  // independent look at the raw words with DCMTK
  REQUIRE(ff.loadFile(f.string().c_str()).good());
  const Uint16* raw = nullptr;
  REQUIRE(ff.getDataset()->findAndGetUint16Array(DCM_PixelData, raw).good());
  CHECK(raw[0] == static_cast<Uint16>(px.values[0] << 4));
  CHECK(raw[777] == static_cast<Uint16>(px.values[777] << 4));

  Result<Radiograph> r = ReadRadiograph(f);
  REQUIRE_MESSAGE(r.ok(), r.error().ToString());
  CHECK(r->header.high_bit == 15);
  CHECK(MaxAbsDiff(r->pixels, px) == 0.0);
}

TEST_CASE("BareDataSetWithoutMetaHeaderIsRead") {
  // PS3.10 7.1 files carry a meta header; DCMTK also reads a bare implicit-VR data set.
  TempDir dir("bare");
  StoredPixels px = MakePixels(32, 32, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  WriteOptions o;
  o.syntax = TransferSyntax::kImplicitLittle;
  o.with_meta_header = false;
  std::filesystem::path f = dir / "bare.dcm";
  REQUIRE(WriteRadiograph(h, px, f, o).ok());
  std::vector<char> bytes = beamtrim::test::ReadBytes(f);
  REQUIRE(bytes.size() > 132);
  CHECK(std::string(bytes.data() + 128, 4) != "DICM");
  CHECK(LooksLikeDicom(f));
  Result<Radiograph> r = ReadRadiograph(f);
  REQUIRE_MESSAGE(r.ok(), r.error().ToString());
  CHECK(MaxAbsDiff(r->pixels, px) == 0.0);

  o.syntax = TransferSyntax::kExplicitLittle;  // only implicit LE can go without meta header
  Status refused = WriteRadiograph(h, px, dir / "bare2.dcm", o);
  CHECK_FALSE(refused.ok());
}

TEST_CASE("WriterRefusesDeepDataForEightBitJpeg") {
  // T.81 process 1 codes 8-bit samples; the writer does not rescale silently.
  TempDir dir("jpeg8");
  StoredPixels px = MakePixels(32, 32, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  WriteOptions o;
  o.syntax = TransferSyntax::kJpegBaseline;
  Status s = WriteRadiograph(h, px, dir / "x.dcm", o);
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().attribute.find("(0028,0101)") != std::string::npos);
  o.syntax = TransferSyntax::kJpegExtended;  // 12 bits fit process 2/4
  CHECK(WriteRadiograph(h, px, dir / "y.dcm", o).ok());
  StoredPixels deep = MakePixels(32, 32, 14, false);
  CHECK_FALSE(WriteRadiograph(MakeHeader(deep, 16, 14, false), deep, dir / "z.dcm", o).ok());
}

TEST_CASE("HeaderFieldsSurviveWriteAndRead") {
  // Synthetic header of a fictional clinic; every attribute the writer knows.
  TempDir dir("hdr");
  StoredPixels px = MakePixels(40, 30, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  h.presentation_intent_type = "FOR PROCESSING";
  h.pixel_intensity_relationship = "LIN";
  h.pixel_intensity_relationship_sign = 1;
  h.imager_pixel_spacing = std::array<double, 2>{0.139, 0.14};
  h.pixel_spacing = std::array<double, 2>{0.125, 0.126};
  h.pixel_spacing_calibration_type = "GEOMETRY";
  h.estimated_magnification = 1.12;
  h.distance_source_to_detector_mm = 1150.0;
  h.distance_source_to_patient_mm = 1000.0;
  h.detector_active_dimensions_mm = std::array<double, 2>{430.0, 350.0};
  h.field_of_view_origin = std::array<double, 2>{10.0, 20.0};
  h.field_of_view_dimensions_mm = std::array<double, 2>{400.0, 300.0};
  h.field_of_view_rotation_deg = 90.0;
  h.field_of_view_horizontal_flip = "NO";
  h.collimator_shape = "RECTANGULAR";
  h.collimator_edges = DeclaredEdges{3, 37, 4, 26};
  h.shutter_shape = "RECTANGULAR";
  h.shutter_edges = DeclaredEdges{2, 38, 1, 29};
  h.collimator_circle_center = std::array<double, 2>{15, 20};
  h.collimator_circle_radius = 12;
  h.collimator_polygon = {2, 3, 2, 37, 27, 37, 27, 3};
  h.shutter_circle_center = std::array<double, 2>{14, 19};
  h.shutter_circle_radius = 11;
  h.shutter_polygon = {1, 1, 1, 30, 20, 15};
  h.area_dose_product_dgy_cm2 = 1.85;
  h.entrance_dose_mgy = 0.21;
  h.kvp = 72.0;
  h.exposure_uas = 3200.0;
  h.exposure_index = 420.0;
  h.target_exposure_index = 400.0;
  h.deviation_index = 0.21;
  h.operators_name = "RT-07";
  h.station_name = "ROOM2";
  h.institution_name = "Fictional Clinic";
  h.manufacturer = "Synthetic";
  h.body_part_examined = "CHEST";
  h.view_position = "PA";
  h.protocol_name = "Chest PA";
  h.study_description = "Chest";
  h.study_date = "20260115";
  h.acquisition_date = "20260116";
  h.content_date = "20260117";
  h.accession_number = "ACC0001";
  h.sop_instance_uid = "1.2.826.0.1.3680043.2.1125.1.1";
  h.study_instance_uid = "1.2.826.0.1.3680043.2.1125.1.2";
  h.series_instance_uid = "1.2.826.0.1.3680043.2.1125.1.3";
  for (TransferSyntax syntax : {TransferSyntax::kExplicitLittle, TransferSyntax::kJpeg2000Lossless}) {
    std::filesystem::path f = dir / (std::string(TransferSyntaxName(syntax)) + ".dcm");
    WriteOptions o;
    o.syntax = syntax;
    REQUIRE(WriteRadiograph(h, px, f, o).ok());
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    const RadiographHeader& g = r->header;
    CHECK(g.sop_class_uid == UID_DigitalXRayImageStorageForProcessing);
    CHECK(g.sop_instance_uid == h.sop_instance_uid);
    CHECK(g.study_instance_uid == h.study_instance_uid);
    CHECK(g.series_instance_uid == h.series_instance_uid);
    CHECK(g.accession_number == "ACC0001");
    CHECK(g.presentation_intent_type == "FOR PROCESSING");
    CHECK(g.pixel_intensity_relationship == "LIN");
    CHECK(g.pixel_intensity_relationship_sign == 1);
    CHECK((*g.imager_pixel_spacing)[0] == doctest::Approx(0.139));
    CHECK((*g.imager_pixel_spacing)[1] == doctest::Approx(0.14));
    CHECK((*g.pixel_spacing)[1] == doctest::Approx(0.126));
    CHECK(g.pixel_spacing_calibration_type == "GEOMETRY");
    CHECK(*g.estimated_magnification == doctest::Approx(1.12));
    CHECK(*g.distance_source_to_detector_mm == doctest::Approx(1150.0));
    CHECK(*g.distance_source_to_patient_mm == doctest::Approx(1000.0));
    CHECK((*g.detector_active_dimensions_mm)[0] == doctest::Approx(430.0));
    CHECK((*g.field_of_view_origin)[1] == doctest::Approx(20.0));
    CHECK((*g.field_of_view_dimensions_mm)[0] == doctest::Approx(400.0));
    CHECK(*g.field_of_view_rotation_deg == doctest::Approx(90.0));
    CHECK(g.field_of_view_horizontal_flip == "NO");
    CHECK(g.collimator_shape == "RECTANGULAR");
    REQUIRE(g.collimator_edges.has_value());
    CHECK(g.collimator_edges->left == 3);
    CHECK(g.collimator_edges->right == 37);
    CHECK(g.collimator_edges->upper == 4);
    CHECK(g.collimator_edges->lower == 26);
    REQUIRE(g.shutter_edges.has_value());
    CHECK(g.shutter_edges->lower == 29);
    REQUIRE(g.collimator_circle_center.has_value());
    CHECK((*g.collimator_circle_center)[1] == 20);
    CHECK(*g.collimator_circle_radius == 12);
    CHECK(g.collimator_polygon == h.collimator_polygon);
    REQUIRE(g.shutter_circle_center.has_value());
    CHECK((*g.shutter_circle_center)[0] == 14);
    CHECK(*g.shutter_circle_radius == 11);
    CHECK(g.shutter_polygon == h.shutter_polygon);
    CHECK(*g.area_dose_product_dgy_cm2 == doctest::Approx(1.85));
    CHECK(*g.entrance_dose_mgy == doctest::Approx(0.21));
    CHECK(*g.kvp == doctest::Approx(72.0));
    CHECK(*g.exposure_uas == doctest::Approx(3200.0));
    CHECK(*g.exposure_index == doctest::Approx(420.0));
    CHECK(*g.target_exposure_index == doctest::Approx(400.0));
    CHECK(*g.deviation_index == doctest::Approx(0.21));
    CHECK(g.operators_name == "RT-07");
    CHECK(g.station_name == "ROOM2");
    CHECK(g.institution_name == "Fictional Clinic");
    CHECK(g.manufacturer == "Synthetic");
    CHECK(g.body_part_examined == "CHEST");
    CHECK(g.view_position == "PA");
    CHECK(g.protocol_name == "Chest PA");
    CHECK(g.study_description == "Chest");
    CHECK(g.study_date == "20260115");
    CHECK(g.acquisition_date == "20260116");
    CHECK(g.content_date == "20260117");
    CHECK(r->linear);  // FOR PROCESSING + LIN + MONOCHROME2
  }
}

TEST_CASE("HeaderOnlyReadLeavesPixelsEmpty") {
  TempDir dir("hdronly");
  StoredPixels px = MakePixels(40, 30, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  h.body_part_examined = "HAND";
  std::filesystem::path f = dir / "h.dcm";
  REQUIRE(WriteRadiograph(h, px, f).ok());
  ReadOptions o;
  o.header_only = true;
  Result<Radiograph> r = ReadRadiograph(f, o);
  REQUIRE_MESSAGE(r.ok(), r.error().ToString());
  CHECK(r->pixels.empty());
  CHECK(r->header.rows == 30);
  CHECK(r->header.body_part_examined == "HAND");
}

TEST_CASE("LossyJpegKeepsModalityValuesOfRescaledData") {
  // Rescale slope 0.5, intercept -100 (synthetic). DCMTK's lossy encoder maps the pixel
  // range onto the JPEG sample range and records that in Rescale Slope/Intercept; the reader
  // must still return modality values within the lossy tolerance (our bound: mean error
  // below 1 % of the modality range).
  TempDir dir("lossyrescale");
  for (TransferSyntax syntax : {TransferSyntax::kJpegBaseline, TransferSyntax::kJpegExtended}) {
    int bits = BitsFor(syntax);
    StoredPixels px = MakePixels(64, 64, bits, false, 3);
    RadiographHeader h = MakeHeader(px, bits > 8 ? 16 : 8, bits, false);
    h.rescale_slope = 0.5;
    h.rescale_intercept = -100.0;
    WriteOptions o;
    o.syntax = syntax;
    std::filesystem::path f = dir / (std::string(TransferSyntaxName(syntax)) + ".dcm");
    REQUIRE(WriteRadiograph(h, px, f, o).ok());
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    double sum = 0;
    for (size_t i = 0; i < px.values.size(); ++i) {
      sum += std::fabs(r->pixels.data()[i] - (0.5 * px.values[i] - 100.0));
    }
    double range = 0.5 * ((1 << bits) - 1);
    CHECK(sum / static_cast<double>(px.values.size()) <= 0.01 * range);
  }
}

TEST_CASE("JpegLosslessProcess14WithOtherPredictorIsRead") {
  // 1.2.840.10008.1.2.4.57 (any predictor) is read-only here: DCMTK encodes it in the test
  // with predictor 6 (ITU-T T.81 Table H.1); decoding must be exact.
  TempDir dir("p14");
  StoredPixels px = MakePixels(48, 40, 16, false, 21);
  std::filesystem::path src = dir / "src.dcm";
  REQUIRE(WriteRadiograph(MakeHeader(px, 16, 16, false), px, src).ok());
  DcmFileFormat ff;
  REQUIRE(ff.loadFile(src.string().c_str()).good());
  DJ_RPLossless param(6, 0);
  REQUIRE(ff.getDataset()->chooseRepresentation(EXS_JPEGProcess14, &param).good());
  std::filesystem::path f = dir / "p14.dcm";
  REQUIRE(ff.saveFile(f.string().c_str(), EXS_JPEGProcess14).good());
  Result<Radiograph> r = ReadRadiograph(f);
  REQUIRE_MESSAGE(r.ok(), r.error().ToString());
  CHECK(r->header.transfer_syntax_uid == "1.2.840.10008.1.2.4.57");
  CHECK(MaxAbsDiff(r->pixels, px) == 0.0);
}

TEST_CASE("ComputedRadiographyGetsTheCrStorageClass") {
  // PS3.4 Annex B: CR Image Storage is 1.2.840.10008.5.1.4.1.1.1.
  TempDir dir("cr");
  StoredPixels px = MakePixels(20, 20, 10, false);
  RadiographHeader h = MakeHeader(px, 16, 10, false);
  h.modality = "CR";
  REQUIRE(WriteRadiograph(h, px, dir / "cr.dcm").ok());
  Result<Radiograph> r = ReadRadiograph(dir / "cr.dcm");
  REQUIRE_MESSAGE(r.ok(), r.error().ToString());
  CHECK(r->header.sop_class_uid == "1.2.840.10008.5.1.4.1.1.1");
  CHECK(r->header.modality == "CR");
}

TEST_CASE("ParallelReadsGiveTheSameImages") {
  // Batch scans read from several threads; codec registration happens lazily inside.
  TempDir dir("threads");
  std::vector<std::filesystem::path> files;
  std::vector<StoredPixels> truth;
  const TransferSyntax syntaxes[] = {TransferSyntax::kJpegLsLossless, TransferSyntax::kRle,
                                     TransferSyntax::kJpeg2000Lossless, TransferSyntax::kJpegLossless};
  for (int i = 0; i < 8; ++i) {
    truth.push_back(MakePixels(64, 64, 12, false, static_cast<unsigned>(100 + i)));
    files.push_back(dir / ("t" + std::to_string(i) + ".dcm"));
    WriteOptions o;
    o.syntax = syntaxes[i % 4];
    REQUIRE(WriteRadiograph(MakeHeader(truth.back(), 16, 12, false), truth.back(), files.back(), o).ok());
  }
  std::vector<double> worst(files.size(), -1.0);
  std::vector<std::thread> threads;
  for (size_t t = 0; t < 4; ++t) {
    threads.emplace_back([&, t] {
      for (size_t i = t; i < files.size(); i += 4) {
        Result<Radiograph> r = ReadRadiograph(files[i]);
        worst[i] = r.ok() ? MaxAbsDiff(r->pixels, truth[i]) : 1e9;
      }
    });
  }
  for (std::thread& th : threads) th.join();
  for (double w : worst) CHECK(w == 0.0);
}
