// JPEG 2000 against an independent use of OpenJPEG: codestreams made here with OpenJPEG's
// own file streams (not beamtrim's in-memory adapter) are wrapped with DCMTK and read back,
// and beamtrim's encoded fragments are decoded here independently. Pixels are synthetic.
#include <doctest/doctest.h>

#include <cstring>

#include <dcmtk/dcmdata/dcpixel.h>
#include <dcmtk/dcmdata/dcpixseq.h>
#include <dcmtk/dcmdata/dcpxitem.h>
#include <openjpeg.h>

#include "dicom/test_util.h"

using namespace beamtrim;
using beamtrim::test::MakeHeader;
using beamtrim::test::MakePixels;
using beamtrim::test::TempDir;

namespace {

// ISO/IEC 15444-1 encode of one grey component with OpenJPEG to a file on disk.
bool EncodeWithOpenJpeg(const StoredPixels& p, int precision, bool is_signed, OPJ_CODEC_FORMAT format,
                        const std::filesystem::path& out) {
  opj_image_cmptparm_t cp;
  std::memset(&cp, 0, sizeof cp);
  cp.dx = cp.dy = 1;
  cp.w = static_cast<OPJ_UINT32>(p.width);
  cp.h = static_cast<OPJ_UINT32>(p.height);
  cp.prec = static_cast<OPJ_UINT32>(precision);
  cp.sgnd = is_signed ? 1 : 0;
  opj_image_t* img = opj_image_create(1, &cp, OPJ_CLRSPC_GRAY);
  img->x1 = cp.w;
  img->y1 = cp.h;
  for (size_t i = 0; i < p.values.size(); ++i) img->comps[0].data[i] = p.values[i];
  opj_cparameters_t params;
  opj_set_default_encoder_parameters(&params);
  params.tcp_numlayers = 1;
  params.tcp_rates[0] = 0;  // lossless
  params.cp_disto_alloc = 1;
  params.numresolution = 4;
  opj_codec_t* codec = opj_create_compress(format);
  opj_stream_t* stream = opj_stream_create_default_file_stream(out.string().c_str(), OPJ_FALSE);
  bool ok = opj_setup_encoder(codec, &params, img) && opj_start_compress(codec, img, stream) &&
            opj_encode(codec, stream) && opj_end_compress(codec, stream);
  opj_stream_destroy(stream);
  opj_destroy_codec(codec);
  opj_image_destroy(img);
  return ok;
}

std::vector<int32_t> DecodeWithOpenJpeg(const std::filesystem::path& in) {
  opj_codec_t* codec = opj_create_decompress(OPJ_CODEC_J2K);
  opj_dparameters_t params;
  opj_set_default_decoder_parameters(&params);
  opj_setup_decoder(codec, &params);
  opj_stream_t* stream = opj_stream_create_default_file_stream(in.string().c_str(), OPJ_TRUE);
  opj_image_t* img = nullptr;
  std::vector<int32_t> values;
  if (opj_read_header(stream, codec, &img) && opj_decode(codec, stream, img)) {
    size_t n = static_cast<size_t>(img->comps[0].w) * img->comps[0].h;
    values.assign(img->comps[0].data, img->comps[0].data + n);
  }
  opj_image_destroy(img);
  opj_stream_destroy(stream);
  opj_destroy_codec(codec);
  return values;
}

// Wraps a codestream as PS3.5 A.4 encapsulated pixel data: empty offset table + fragments.
void WriteEncapsulated(const RadiographHeader& h, std::vector<char> bytes, E_TransferSyntax xfer,
                       const std::filesystem::path& out, size_t fragments = 1) {
  DcmFileFormat ff;
  DcmDataset& ds = *ff.getDataset();
  beamtrim::test::PutMinimalDx(ds, h.rows, h.columns);
  ds.putAndInsertUint16(DCM_BitsStored, static_cast<Uint16>(h.bits_stored));
  ds.putAndInsertUint16(DCM_HighBit, static_cast<Uint16>(h.bits_stored - 1));
  ds.putAndInsertUint16(DCM_PixelRepresentation, static_cast<Uint16>(h.pixel_representation));
  if (bytes.size() % 2) bytes.push_back(0);
  auto* seq = new DcmPixelSequence(DCM_PixelSequenceTag);
  seq->insert(new DcmPixelItem(DCM_PixelItemTag));
  size_t step = (bytes.size() / fragments + 1) & ~size_t{1};
  for (size_t at = 0; at < bytes.size(); at += step) {
    auto* item = new DcmPixelItem(DCM_PixelItemTag);
    size_t len = std::min(step, bytes.size() - at);
    item->putUint8Array(reinterpret_cast<const Uint8*>(bytes.data() + at), static_cast<Uint32>(len));
    seq->insert(item);
  }
  auto* pd = new DcmPixelData(DCM_PixelData);
  pd->putOriginalRepresentation(xfer, nullptr, seq);
  ds.insert(pd, true);
  REQUIRE(ff.saveFile(out.string().c_str(), xfer).good());
}

}  // namespace

TEST_CASE("IndependentOpenJpegCodestreamDecodesExactly") {
  TempDir dir("j2k");
  for (bool is_signed : {false, true}) {
    for (OPJ_CODEC_FORMAT format : {OPJ_CODEC_J2K, OPJ_CODEC_JP2}) {
      CAPTURE(is_signed);
      CAPTURE(static_cast<int>(format));
      StoredPixels px = MakePixels(72, 56, 12, is_signed, 5);
      RadiographHeader h = MakeHeader(px, 16, 12, is_signed);
      std::filesystem::path cs = dir / (format == OPJ_CODEC_J2K ? "a.j2k" : "a.jp2");
      REQUIRE(EncodeWithOpenJpeg(px, 12, is_signed, format, cs));
      std::filesystem::path f = dir / "wrapped.dcm";
      WriteEncapsulated(h, beamtrim::test::ReadBytes(cs), EXS_JPEG2000LosslessOnly, f, 3);
      Result<Radiograph> r = ReadRadiograph(f);
      REQUIRE_MESSAGE(r.ok(), r.error().ToString());
      for (size_t i = 0; i < px.values.size(); i += 97) {
        CHECK(r->pixels.data()[i] == static_cast<float>(px.values[i]));
      }
    }
  }
}

TEST_CASE("WrittenJpeg2000FragmentsDecodeIndependently") {
  // The writer's lossy codestream decoded by OpenJPEG's file API must equal what the
  // reader returns (same decoder, different path); the lossless one must equal the input.
  TempDir dir("j2kw");
  for (TransferSyntax syntax : {TransferSyntax::kJpeg2000Lossless, TransferSyntax::kJpeg2000}) {
    StoredPixels px = MakePixels(80, 64, 14, false, 9);
    RadiographHeader h = MakeHeader(px, 16, 14, false);
    std::filesystem::path f = dir / "w.dcm";
    WriteOptions o;
    o.syntax = syntax;
    REQUIRE(WriteRadiograph(h, px, f, o).ok());

    DcmFileFormat ff;
    REQUIRE(ff.loadFile(f.string().c_str()).good());
    DcmElement* elem = nullptr;
    REQUIRE(ff.getDataset()->findAndGetElement(DCM_PixelData, elem).good());
    DcmPixelSequence* seq = nullptr;
    auto* pd = static_cast<DcmPixelData*>(elem);
    REQUIRE(pd->getEncapsulatedRepresentation(o.syntax == TransferSyntax::kJpeg2000 ? EXS_JPEG2000
                                                                                    : EXS_JPEG2000LosslessOnly,
                                              nullptr, seq).good());
    REQUIRE(seq->card() == 2);  // empty offset table + one fragment
    DcmPixelItem* table = nullptr;
    REQUIRE(seq->getItem(table, 0).good());
    CHECK(table->getLength() == 0);
    DcmPixelItem* frag = nullptr;
    REQUIRE(seq->getItem(frag, 1).good());
    Uint8* data = nullptr;
    REQUIRE(frag->getUint8Array(data).good());
    std::filesystem::path cs = dir / "w.j2k";
    beamtrim::test::WriteBytes(cs, std::vector<char>(data, data + frag->getLength()));
    std::vector<int32_t> independent = DecodeWithOpenJpeg(cs);
    REQUIRE(independent.size() == px.values.size());

    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    double worst = 0;
    for (size_t i = 0; i < independent.size(); ++i) {
      CHECK(r->pixels.data()[i] == static_cast<float>(independent[i]));
      worst = std::max(worst, std::fabs(static_cast<double>(independent[i]) - px.values[i]));
      if (r->pixels.data()[i] != static_cast<float>(independent[i])) break;
    }
    if (syntax == TransferSyntax::kJpeg2000Lossless) CHECK(worst == 0.0);
    else CHECK(worst <= 0.05 * 16383);  // lossy at quality 90: within 5 % of range (our bound)
  }
}

// The reader decodes a one-fragment frame where DCMTK keeps it and joins a frame split over
// several fragments first (PS3.5 A.4 allows both for one frame). Both paths must give every
// pixel exactly as OpenJPEG decodes the codestream on its own (the independent decoder above).
TEST_CASE("Jpeg2000FrameInOneFragmentOrSeveralReadsToTheSamePixels") {
  TempDir dir("j2kfrag");
  StoredPixels px = MakePixels(90, 70, 12, false, 11);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  std::filesystem::path cs = dir / "a.j2k";
  REQUIRE(EncodeWithOpenJpeg(px, 12, false, OPJ_CODEC_J2K, cs));
  std::vector<int32_t> independent = DecodeWithOpenJpeg(cs);
  REQUIRE(independent.size() == px.values.size());
  for (size_t fragments : {size_t{1}, size_t{2}, size_t{5}}) {
    CAPTURE(fragments);
    std::filesystem::path f = dir / ("f" + std::to_string(fragments) + ".dcm");
    WriteEncapsulated(h, beamtrim::test::ReadBytes(cs), EXS_JPEG2000LosslessOnly, f, fragments);
    Result<Radiograph> r = ReadRadiograph(f);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    REQUIRE(r->pixels.width() == 90);
    REQUIRE(r->pixels.height() == 70);
    size_t differing = 0;
    for (size_t i = 0; i < independent.size(); ++i) {
      if (r->pixels.data()[i] != static_cast<float>(independent[i])) ++differing;
    }
    CHECK(differing == 0);
  }
}

TEST_CASE("Jpeg2000WithBadHeaderIsRejected") {
  TempDir dir("j2kbad");
  StoredPixels px = MakePixels(64, 48, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);

  // SOC + SIZ markers followed by garbage: the SIZ segment cannot be parsed.
  std::vector<char> garbage = {'\xFF', '\x4F', '\xFF', '\x51', '\x00', '\x03', '\x01'};
  garbage.resize(200, '\x7E');
  std::filesystem::path f = dir / "badsiz.dcm";
  WriteEncapsulated(h, garbage, EXS_JPEG2000LosslessOnly, f);
  Result<Radiograph> r = ReadRadiograph(f);
  REQUIRE_FALSE(r.ok());
  CHECK(r.error().ToString().find("badsiz.dcm") != std::string::npos);
  CHECK(r.error().attribute.find("(7FE0,0010)") != std::string::npos);
  CHECK(r.error().reason.find("JPEG 2000") != std::string::npos);

  // No J2K/JP2 signature at all.
  std::vector<char> plain(200, '\x11');
  std::filesystem::path g = dir / "nosig.dcm";
  WriteEncapsulated(h, plain, EXS_JPEG2000, g);
  Result<Radiograph> s = ReadRadiograph(g);
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().reason.find("signature") != std::string::npos);

  // A valid codestream whose size disagrees with Rows/Columns.
  std::filesystem::path cs = dir / "small.j2k";
  StoredPixels other = MakePixels(32, 32, 12, false);
  REQUIRE(EncodeWithOpenJpeg(other, 12, false, OPJ_CODEC_J2K, cs));
  std::filesystem::path m = dir / "mismatch.dcm";
  WriteEncapsulated(h, beamtrim::test::ReadBytes(cs), EXS_JPEG2000LosslessOnly, m);
  Result<Radiograph> t = ReadRadiograph(m);
  REQUIRE_FALSE(t.ok());
  CHECK(t.error().reason.find("32 x 32") != std::string::npos);

  // A valid codestream cut in half: strict decoding refuses it.
  std::vector<char> full;
  std::filesystem::path cs2 = dir / "full.j2k";
  REQUIRE(EncodeWithOpenJpeg(px, 12, false, OPJ_CODEC_J2K, cs2));
  full = beamtrim::test::ReadBytes(cs2);
  full.resize(full.size() / 2);
  std::filesystem::path half = dir / "half.dcm";
  WriteEncapsulated(h, full, EXS_JPEG2000LosslessOnly, half);
  Result<Radiograph> u = ReadRadiograph(half);
  REQUIRE_FALSE(u.ok());
  CHECK(u.error().ToString().find("half.dcm") != std::string::npos);
}
