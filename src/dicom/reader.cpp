// ReadRadiograph: load a DICOM file with DCMTK, validate what the pixel pipeline relies on,
// decode the first frame (DCMTK codecs, or OpenJPEG for JPEG 2000) and normalise it to the
// Image convention "larger value = more radiation" (docs/dicom.md).
#include <algorithm>
#include <cmath>
#include <fstream>
#include <memory>
#include <optional>
#include <set>

#include <dcmtk/dcmdata/dcpixel.h>
#include <dcmtk/dcmdata/dcpixseq.h>
#include <dcmtk/dcmdata/dcpxitem.h>

#include "dicom/dicom_internal.h"
#include "dicom/jpeg_frame.h"

namespace beamtrim {
namespace fs = std::filesystem;
using namespace dicom_internal;

namespace {

// Values longer than this stay on disk while parsing; pixel data is read on demand, so a
// lying length field cannot make DCMTK allocate it during loadFile.
constexpr Uint32 kMaxReadLength = 64 * 1024;

// Item tags allowed before DCMTK parses a file: a radiograph holds a few dozen, plus one per
// compressed fragment; 20 000 nested levels exhaust an 8 MiB stack (nesting_guard.cpp).
constexpr size_t kMaxItems = 5000;

struct Context {
  std::string file;
  int64_t file_size = 0;
  ReadOptions options;
};

Error Fail(const Context& c, ErrorKind kind, const DcmTagKey& key, std::string reason) {
  return MakeError(kind, c.file, std::move(reason), TagLabel(key));
}

const std::set<std::string>& SupportedSyntaxes() {
  // PS3.6 Annex A UIDs of the syntaxes in docs/dicom.md.
  static const std::set<std::string> kUids = {
      "1.2.840.10008.1.2",      "1.2.840.10008.1.2.1",    "1.2.840.10008.1.2.2",
      "1.2.840.10008.1.2.1.99", "1.2.840.10008.1.2.5",    "1.2.840.10008.1.2.4.50",
      "1.2.840.10008.1.2.4.51", "1.2.840.10008.1.2.4.57", "1.2.840.10008.1.2.4.70",
      "1.2.840.10008.1.2.4.80", "1.2.840.10008.1.2.4.81", "1.2.840.10008.1.2.4.90",
      "1.2.840.10008.1.2.4.91"};
  return kUids;
}

constexpr const char* kRleUid = "1.2.840.10008.1.2.5";

bool IsJpeg2000(const std::string& uid) {
  return uid == "1.2.840.10008.1.2.4.90" || uid == "1.2.840.10008.1.2.4.91";
}

// Opens the file with DCMTK. Header-only reads stop before Pixel Data.
Result<std::unique_ptr<DcmFileFormat>> Load(const Context& c) {
  auto ff = std::make_unique<DcmFileFormat>();
  OFCondition cond =
      c.options.header_only
          ? ff->loadFileUntilTag(c.file.c_str(), EXS_Unknown, EGL_noChange, kMaxReadLength,
                                 ERM_autoDetect, DCM_PixelData)
          : ff->loadFile(c.file.c_str(), EXS_Unknown, EGL_noChange, kMaxReadLength,
                         ERM_autoDetect);
  std::string meta_uid = GetString(*ff->getMetaInfo(), DCM_TransferSyntaxUID);
  if (!meta_uid.empty() && SupportedSyntaxes().count(meta_uid) == 0) {
    DcmXfer xfer(meta_uid.c_str());
    std::string name = xfer.getXfer() == EXS_Unknown ? "unknown" : xfer.getXferName();
    return Fail(c, ErrorKind::kUnsupported, DCM_TransferSyntaxUID,
                "transfer syntax " + meta_uid + " (" + name + ") is not supported");
  }
  if (cond.bad()) {
    return MakeError(ErrorKind::kMalformed, c.file,
                std::string("DICOM structure unreadable (truncated or corrupt): ") + cond.text());
  }
  return ff;
}

Status CheckKind(const Context& c, const RadiographHeader& h, std::vector<std::string>& notes) {
  // Projection radiography only: DX, CR and RG (PS3.3 C.7.3.1.1.1 defined terms).
  static const std::set<std::string> kAccepted = {"DX", "CR", "RG"};
  if (h.modality.empty()) {
    notes.push_back("modality missing: treated as a projection radiograph");
  } else if (kAccepted.count(h.modality) == 0) {
    return Fail(c, ErrorKind::kUnsupported, DCM_Modality,
                "modality " + h.modality + " is not a projection radiograph (DX, CR, RG)");
  }
  if (h.samples_per_pixel != 1) {
    return Fail(c, ErrorKind::kUnsupported, DCM_SamplesPerPixel,
                "colour image (" + std::to_string(h.samples_per_pixel) + " samples per pixel)");
  }
  if (h.photometric_interpretation != "MONOCHROME1" &&
      h.photometric_interpretation != "MONOCHROME2") {
    return Fail(c, ErrorKind::kUnsupported, DCM_PhotometricInterpretation,
                "photometric interpretation '" + h.photometric_interpretation +
                    "' is not MONOCHROME1 or MONOCHROME2");
  }
  return Status::Ok();
}

Status CheckGeometry(const Context& c, const RadiographHeader& h) {
  if (h.rows <= 0) return Fail(c, ErrorKind::kMalformed, DCM_Rows, "zero or missing");
  if (h.columns <= 0) return Fail(c, ErrorKind::kMalformed, DCM_Columns, "zero or missing");
  int64_t pixels = static_cast<int64_t>(h.rows) * h.columns;
  if (pixels > c.options.max_pixels) {
    return Fail(c, ErrorKind::kMalformed, DCM_Rows,
                std::to_string(h.rows) + " x " + std::to_string(h.columns) +
                    " pixels declared, above the limit of " +
                    std::to_string(c.options.max_pixels));
  }
  // PS3.5 8.1.1 and PS3.3 C.7.6.3.1: 0 < Bits Stored <= Bits Allocated,
  // High Bit = Bits Stored - 1 .. Bits Allocated - 1 (8, 16, 32 supported here).
  if (h.bits_allocated != 8 && h.bits_allocated != 16 && h.bits_allocated != 32) {
    return Fail(c, ErrorKind::kUnsupported, DCM_BitsAllocated,
                std::to_string(h.bits_allocated) + " bits allocated (8, 16 or 32 supported)");
  }
  if (h.bits_stored < 1 || h.bits_stored > h.bits_allocated) {
    return Fail(c, ErrorKind::kMalformed, DCM_BitsStored,
                std::to_string(h.bits_stored) + " is outside 1.." + std::to_string(h.bits_allocated));
  }
  if (h.high_bit < h.bits_stored - 1 || h.high_bit >= h.bits_allocated) {
    return Fail(c, ErrorKind::kMalformed, DCM_HighBit,
                std::to_string(h.high_bit) + " does not fit Bits Stored " +
                    std::to_string(h.bits_stored) + " in Bits Allocated " +
                    std::to_string(h.bits_allocated));
  }
  if (h.number_of_frames < 1) {
    return Fail(c, ErrorKind::kMalformed, DCM_NumberOfFrames, "zero or negative");
  }
  if (!(h.rescale_slope != 0.0 && std::isfinite(h.rescale_slope))) {
    return Fail(c, ErrorKind::kMalformed, DCM_RescaleSlope, "zero or not a number");
  }
  return Status::Ok();
}

// Direction of the stored scale (docs/dicom.md "Pixel convention"). Pixel Intensity
// Relationship Sign (0028,1041) decides when present: -1 means higher values = less X-ray
// intensity (PS3.3 DX Image module). Without it: MONOCHROME1 shows low values white
// (PS3.3 C.7.6.3.1.2), white = little radiation, so larger already means more radiation;
// MONOCHROME2 linear or FOR PROCESSING data are detector signal, larger = more; other
// MONOCHROME2 images are display-ready with bone bright, so they are inverted.
bool Inverted(const RadiographHeader& h) {
  if (h.pixel_intensity_relationship_sign != 0) return h.pixel_intensity_relationship_sign < 0;
  if (h.photometric_interpretation == "MONOCHROME1") return false;
  return !(h.pixel_intensity_relationship == "LIN" || h.presentation_intent_type == "FOR PROCESSING");
}

// Stored value -> Image value. Modality value m = slope * stored + intercept (PS3.3
// C.11.1.1.2). An inverted scale is mirrored within the representable modality range
// [m_lo, m_hi]: out = m_lo + m_hi - m, which keeps the range (and keeps values >= 0 when
// m_lo >= 0).
struct ToImageValue {
  explicit ToImageValue(const RadiographHeader& h)
      : slope(h.rescale_slope), intercept(h.rescale_intercept), invert(Inverted(h)) {
    double lo = h.pixel_representation == 1 ? -std::ldexp(1.0, h.bits_stored - 1) : 0.0;
    double hi = h.pixel_representation == 1 ? std::ldexp(1.0, h.bits_stored - 1) - 1.0
                                            : std::ldexp(1.0, h.bits_stored) - 1.0;
    mirror = slope * (lo + hi) + 2.0 * intercept;
  }
  float operator()(int32_t stored) const {
    double m = slope * stored + intercept;
    return static_cast<float>(invert ? mirror - m : m);
  }
  double slope, intercept, mirror;
  bool invert;
};

// Stored values of the first frame, one int per pixel, as Pixel Representation says (the
// JPEG 2000 decoder's output, rows x columns of them), to the Image.
void Normalise(const int32_t* stored, const RadiographHeader& h, Image& out) {
  out = Image(h.columns, h.rows);
  const ToImageValue value(h);
  float* px = out.data();
  const size_t n = static_cast<size_t>(h.rows) * h.columns;
  for (size_t i = 0; i < n; ++i) px[i] = value(stored[i]);
}

// Native (little-endian, as DCMTK delivers them) samples of the first frame straight to the
// Image: the bits below High Bit (PS3.5 8.1.1), sign-extended when Pixel Representation is 1,
// then ToImageValue. One pass, no intermediate array of stored values.
template <class Sample>
void NormaliseSamples(const Sample* raw_samples, const RadiographHeader& h, Image& out) {
  out = Image(h.columns, h.rows);
  const size_t n = static_cast<size_t>(h.rows) * h.columns;
  const int shift = h.high_bit + 1 - h.bits_stored;
  const uint32_t mask = h.bits_stored >= 32 ? 0xFFFFFFFFu : ((1u << h.bits_stored) - 1u);
  const uint32_t sign = 1u << (h.bits_stored - 1);
  const bool is_signed = h.pixel_representation == 1;
  const ToImageValue value(h);
  float* px = out.data();
  for (size_t i = 0; i < n; ++i) {
    const uint32_t raw = (static_cast<uint32_t>(raw_samples[i]) >> shift) & mask;
    const int32_t stored =
        is_signed && (raw & sign) != 0
            ? static_cast<int32_t>(static_cast<int64_t>(raw) - (int64_t{1} << h.bits_stored))
            : static_cast<int32_t>(raw);
    px[i] = value(stored);
  }
}

void NormaliseNative(const std::vector<uint8_t>& buf, const RadiographHeader& h, Image& out) {
  if (h.bits_allocated == 8) {
    NormaliseSamples(buf.data(), h, out);
  } else if (h.bits_allocated == 16) {
    NormaliseSamples(reinterpret_cast<const Uint16*>(buf.data()), h, out);
  } else {
    NormaliseSamples(reinterpret_cast<const Uint32*>(buf.data()), h, out);
  }
}

Status CheckNativeLength(const Context& c, DcmElement& pixel, const RadiographHeader& h,
                         bool deflated) {
  // PS3.5 8.1.1: native pixel data holds Rows x Columns x Samples x Bits Allocated / 8 per
  // frame; the value cannot be larger than the file it lives in.
  uint64_t frame = static_cast<uint64_t>(h.rows) * h.columns * (h.bits_allocated / 8);
  uint64_t need = frame * static_cast<uint64_t>(h.number_of_frames);
  uint64_t have = pixel.getLength();
  // The value is exactly that long, plus one pad byte when odd (PS3.5 7.1.1); more means the
  // header describes something else. A deflated file is smaller than its inflated data
  // set, so the file size bound applies to the other syntaxes only.
  uint64_t padded = need + (need % 2);
  if (have < need || have > padded || (!deflated && have > static_cast<uint64_t>(c.file_size))) {
    return Fail(c, ErrorKind::kMalformed, DCM_PixelData,
                "holds " + std::to_string(have) + " bytes, but rows x columns x bits allocated x "
                "frames needs exactly " + std::to_string(need) + " (file size " +
                std::to_string(c.file_size) + ")");
  }
  return Status::Ok();
}

Status DecodeWithDcmtk(const Context& c, DcmDataset& ds, DcmElement& pixel,
                       const RadiographHeader& h, bool encapsulated, Image& out) {
  if (!encapsulated) {
    Status s = CheckNativeLength(c, pixel, h, h.transfer_syntax_uid == "1.2.840.10008.1.2.1.99");
    if (!s) return s.error();
  }
  uint64_t frame = static_cast<uint64_t>(h.rows) * h.columns * (h.bits_allocated / 8);
  std::vector<uint8_t> buf(frame + 1);  // DCMTK wants room for a pad byte
  Uint32 start = 0;
  OFString colour;
  OFCondition cond = pixel.getUncompressedFrame(&ds, 0, start, buf.data(),
                                                static_cast<Uint32>(buf.size()), colour);
  if (cond.bad()) {
    return Fail(c, ErrorKind::kMalformed, DCM_PixelData,
                std::string("first frame could not be decoded: ") + cond.text());
  }
  NormaliseNative(buf, h, out);
  return Status::Ok();
}

// The bytes of frame 1: a view of DCMTK's fragment when the frame is a single fragment (the
// usual case: nothing copied), else the fragments joined into `joined`.
struct FrameBytes {
  std::vector<uint8_t> joined;
  const uint8_t* data = nullptr;
  size_t size = 0;
};

// Fragments of frame 1 in an encapsulated sequence (PS3.5 A.4): item 0 is the Basic Offset
// Table; with several frames and no table, one fragment per frame is the common case, and
// otherwise fragments are taken up to the one ending with the EOC marker FFD9.
Result<FrameBytes> FirstFrameBytes(const Context& c, DcmPixelSequence& seq,
                                   const RadiographHeader& h) {
  unsigned long count = seq.card();
  if (count < 2) return Fail(c, ErrorKind::kMalformed, DCM_PixelData, "encapsulated pixel data has no fragments");
  FrameBytes out;
  std::vector<uint8_t>& bytes = out.joined;
  bool one_per_frame = h.number_of_frames > 1 && count - 1 == static_cast<unsigned long>(h.number_of_frames);
  for (unsigned long i = 1; i < count; ++i) {
    DcmPixelItem* item = nullptr;
    Uint8* data = nullptr;
    if (seq.getItem(item, i).bad() || item->getUint8Array(data).bad()) {
      return Fail(c, ErrorKind::kMalformed, DCM_PixelData, "fragment " + std::to_string(i) + " unreadable");
    }
    Uint32 len = item->getLength();
    // A frame that is one whole fragment is used where DCMTK keeps it.
    bool single = i == 1 && (one_per_frame || (h.number_of_frames == 1 && count == 2));
    if (single) {
      out.data = data;
      out.size = data != nullptr ? len : 0;
      return out;
    }
    if (data != nullptr) bytes.insert(bytes.end(), data, data + len);
    if (h.number_of_frames == 1) continue;
    if (one_per_frame) break;
    size_t n = bytes.size();
    bool eoc = (n >= 2 && bytes[n - 2] == 0xFF && bytes[n - 1] == 0xD9) ||
               (n >= 3 && bytes[n - 3] == 0xFF && bytes[n - 2] == 0xD9 && bytes[n - 1] == 0);
    if (eoc) break;
  }
  out.data = bytes.data();
  out.size = bytes.size();
  return out;
}

// The bytes of frame 1 for the codecs beamtrim decodes itself, from the sequence of fragments
// DCMTK keeps in the file's own (encapsulated) representation. `codec` names the syntax in the
// error when the pixel data is not encapsulated after all.
Result<FrameBytes> EncapsulatedFirstFrame(const Context& c, DcmElement& pixel,
                                          const RadiographHeader& h, const std::string& codec) {
  auto& pd = static_cast<DcmPixelData&>(pixel);
  E_TransferSyntax xfer = EXS_Unknown;
  const DcmRepresentationParameter* param = nullptr;
  pd.getOriginalRepresentationKey(xfer, param);
  DcmPixelSequence* seq = nullptr;
  if (pd.getEncapsulatedRepresentation(xfer, param, seq).bad() || seq == nullptr) {
    return Fail(c, ErrorKind::kMalformed, DCM_PixelData, codec + " pixel data is not encapsulated");
  }
  return FirstFrameBytes(c, *seq, h);
}

// DCMTK decodes a JPEG or JPEG-LS frame into a buffer sized from Rows and Columns without
// comparing the two, so a header that lies about the size gave an image partly made of an
// empty buffer, measured as if real (a fuzzing finding). The frame header must agree.
Status CheckJpegFrameSize(const Context& c, DcmElement& pixel, const RadiographHeader& h) {
  Result<FrameBytes> bytes = EncapsulatedFirstFrame(c, pixel, h, "JPEG");
  if (!bytes) return bytes.error();
  std::optional<JpegFrameSize> frame = ReadJpegFrameSize(bytes->data, bytes->size);
  // No readable frame header, or lines given later by a DNL marker: DCMTK's decoder judges.
  if (!frame || frame->lines == 0) return Status::Ok();
  if (frame->columns != h.columns || frame->lines != h.rows) {
    return Fail(c, ErrorKind::kMalformed, DCM_PixelData,
                "JPEG frame is " + std::to_string(frame->columns) + " x " +
                    std::to_string(frame->lines) + " but Columns x Rows declare " +
                    std::to_string(h.columns) + " x " + std::to_string(h.rows));
  }
  return Status::Ok();
}

Result<J2kImage> DecodeJpeg2000(const Context& c, DcmElement& pixel, const RadiographHeader& h,
                                std::vector<std::string>& notes) {
  Result<FrameBytes> bytes = EncapsulatedFirstFrame(c, pixel, h, "JPEG 2000");
  if (!bytes) return bytes.error();
  Result<J2kImage> img = DecodeJ2k(bytes->data, bytes->size, c.options.max_pixels);
  if (!img) return Fail(c, ErrorKind::kMalformed, DCM_PixelData, img.error().reason);
  if (img->width != h.columns || img->height != h.rows) {
    return Fail(c, ErrorKind::kMalformed, DCM_PixelData,
                "JPEG 2000 codestream is " + std::to_string(img->width) + " x " +
                    std::to_string(img->height) + " but Columns x Rows declare " +
                    std::to_string(h.columns) + " x " + std::to_string(h.rows));
  }
  if (img->components != 1) {
    return Fail(c, ErrorKind::kUnsupported, DCM_SamplesPerPixel,
                "JPEG 2000 codestream has " + std::to_string(img->components) + " components");
  }
  if (img->precision > h.bits_allocated) {
    return Fail(c, ErrorKind::kMalformed, DCM_BitsAllocated,
                "JPEG 2000 precision " + std::to_string(img->precision) + " exceeds Bits Allocated");
  }
  if (img->precision != h.bits_stored || img->is_signed != (h.pixel_representation == 1)) {
    notes.push_back("JPEG 2000 precision/sign (" + std::to_string(img->precision) +
                    (img->is_signed ? " signed" : " unsigned") + ") differs from the header; codestream values used");
  }
  return std::move(*img);
}

// RLE Lossless is decoded by beamtrim itself (src/dicom/rle.cpp explains why).
Status DecodeRle(const Context& c, DcmElement& pixel, const RadiographHeader& h, Image& out) {
  Result<FrameBytes> bytes = EncapsulatedFirstFrame(c, pixel, h, "RLE");
  if (!bytes) return bytes.error();
  Result<std::vector<uint8_t>> frame =
      DecodeRleFrame(bytes->data, bytes->size, h.rows, h.columns, h.bits_allocated / 8);
  if (!frame) return Fail(c, ErrorKind::kMalformed, DCM_PixelData, frame.error().reason);
  NormaliseNative(*frame, h, out);
  return Status::Ok();
}

bool IsLinear(const RadiographHeader& h) {
  // See docs/dicom.md "Linearity": LIN declared, or FOR PROCESSING without another declared
  // relationship, and a scale that is not inverted (a mirrored scale has an unknown zero,
  // so it is not proportional to exposure).
  if (Inverted(h)) return false;
  if (h.pixel_intensity_relationship == "LIN") return true;
  return h.pixel_intensity_relationship.empty() && h.presentation_intent_type == "FOR PROCESSING";
}

Status DecodePixels(const Context& c, DcmDataset& ds, Radiograph& r) {
  const RadiographHeader& h = r.header;
  DcmElement* pixel = nullptr;
  if (ds.findAndGetElement(DCM_PixelData, pixel).bad() || pixel == nullptr) {
    return Fail(c, ErrorKind::kMalformed, DCM_PixelData, "no pixel data in the data set");
  }
  DcmXfer xfer(ds.getOriginalXfer());
  bool own_decoder = IsJpeg2000(h.transfer_syntax_uid) || h.transfer_syntax_uid == kRleUid;
  if (xfer.isEncapsulated() && !own_decoder) {
    if (Status s = CheckJpegFrameSize(c, *pixel, h); !s) return s;
  }
  if (IsJpeg2000(h.transfer_syntax_uid)) {
    Result<J2kImage> stored = DecodeJpeg2000(c, *pixel, h, r.notes);
    if (!stored) return stored.error();
    Normalise(stored->values, h, r.pixels);
    return Status::Ok();
  }
  if (h.transfer_syntax_uid == kRleUid) return DecodeRle(c, *pixel, h, r.pixels);
  return DecodeWithDcmtk(c, ds, *pixel, h, xfer.isEncapsulated(), r.pixels);
}

Result<Radiograph> ReadChecked(const Context& c) {
  Result<std::unique_ptr<DcmFileFormat>> ff = Load(c);
  if (!ff) return ff.error();
  DcmDataset& ds = *(*ff)->getDataset();
  Radiograph r;
  r.file = c.file;
  r.header = ExtractHeader(ds);
  std::string meta_uid = GetString(*(*ff)->getMetaInfo(), DCM_TransferSyntaxUID);
  r.header.transfer_syntax_uid = meta_uid.empty() ? DcmXfer(ds.getOriginalXfer()).getXferID() : meta_uid;
  if (r.header.rows == 0 && r.header.columns == 0 && r.header.modality.empty() &&
      r.header.sop_class_uid.empty()) {
    return MakeError(ErrorKind::kNotDicom, c.file, "no DICOM image attributes found");
  }
  if (Status s = CheckKind(c, r.header, r.notes); !s) return s.error();
  if (Status s = CheckGeometry(c, r.header); !s) return s.error();
  r.linear = IsLinear(r.header);
  if (r.header.pixel_intensity_relationship_sign == 0) {
    r.notes.push_back(std::string("pixel direction inferred from the photometric interpretation: ") +
                      (Inverted(r.header) ? "inverted" : "kept"));
  }
  if (c.options.header_only) return r;
  if (Status s = DecodePixels(c, ds, r); !s) return s.error();
  if (r.header.number_of_frames > 1) {
    r.notes.push_back("multi-frame: first of " + std::to_string(r.header.number_of_frames) +
                      " frames analysed");
  }
  return r;
}

}  // namespace

Result<Radiograph> ReadRadiograph(const fs::path& file, const ReadOptions& options) {
  RegisterDicomCodecs();
  Context c{file.string(), 0, options};
  std::error_code ec;
  fs::file_status st = fs::status(file, ec);
  if (ec || !fs::exists(st)) return MakeError(ErrorKind::kNotFound, c.file, "file not found");
  if (!fs::is_regular_file(st)) return MakeError(ErrorKind::kUnreadable, c.file, "not a regular file");
  c.file_size = static_cast<int64_t>(fs::file_size(file, ec));
  if (ec) return MakeError(ErrorKind::kUnreadable, c.file, ec.message());
  if (!std::ifstream(file, std::ios::binary)) {
    return MakeError(ErrorKind::kUnreadable, c.file, "cannot open for reading");
  }
  if (!LooksLikeDicom(file)) {
    return MakeError(ErrorKind::kNotDicom, c.file,
                     "no 'DICM' marker at byte 128 and no data set start at byte 0");
  }
  if (Status s = CheckItemCount(c.file, kMaxItems); !s) return s.error();
  try {
    return ReadChecked(c);
  } catch (const std::bad_alloc&) {
    return MakeError(ErrorKind::kMalformed, c.file, "declared sizes need more memory than available");
  } catch (const std::exception& e) {
    return MakeError(ErrorKind::kInternal, c.file, e.what());
  }
}

}  // namespace beamtrim
