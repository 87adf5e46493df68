// WriteRadiograph: builds a DX/CR data set from a RadiographHeader and stored pixels, then
// encodes it in the requested transfer syntax (DCMTK encoders; OpenJPEG for JPEG 2000).
#include <cmath>
#include <cstdio>
#include <memory>

#include <dcmtk/dcmdata/dcpixel.h>
#include <dcmtk/dcmdata/dcpixseq.h>
#include <dcmtk/dcmdata/dcpxitem.h>
#include <dcmtk/dcmdata/dcrlerp.h>
#include <dcmtk/dcmjpeg/djrplol.h>
#include <dcmtk/dcmjpeg/djrploss.h>
#include <dcmtk/dcmjpls/djrparam.h>

#include "beamtrim/dicom_writer.h"
#include "dicom/dicom_internal.h"

namespace beamtrim {
namespace fs = std::filesystem;
using namespace dicom_internal;

namespace {

struct Layout {  // the pixel description actually written
  int bits_allocated, bits_stored, high_bit, signed_pixels;
};

E_TransferSyntax ToDcmtk(TransferSyntax s) {
  switch (s) {
    case TransferSyntax::kImplicitLittle: return EXS_LittleEndianImplicit;
    case TransferSyntax::kExplicitLittle: return EXS_LittleEndianExplicit;
    case TransferSyntax::kExplicitBig: return EXS_BigEndianExplicit;
    case TransferSyntax::kDeflated: return EXS_DeflatedLittleEndianExplicit;
    case TransferSyntax::kRle: return EXS_RLELossless;
    case TransferSyntax::kJpegBaseline: return EXS_JPEGProcess1;
    case TransferSyntax::kJpegExtended: return EXS_JPEGProcess2_4;
    case TransferSyntax::kJpegLossless: return EXS_JPEGProcess14SV1;
    case TransferSyntax::kJpegLsLossless: return EXS_JPEGLSLossless;
    case TransferSyntax::kJpegLsNearLossless: return EXS_JPEGLSLossy;
    case TransferSyntax::kJpeg2000Lossless: return EXS_JPEG2000LosslessOnly;
    case TransferSyntax::kJpeg2000: return EXS_JPEG2000;
  }
  return EXS_LittleEndianExplicit;
}

// DS values are at most 16 characters (PS3.5 6.2): shorten the precision until it fits.
std::string FormatDs(double v) {
  char buf[32];
  for (int digits = 12; digits > 0; --digits) {
    std::snprintf(buf, sizeof buf, "%.*g", digits, v);
    if (std::string(buf).size() <= 16) break;
  }
  return buf;
}

void PutText(DcmDataset& ds, const DcmTagKey& key, const std::string& v) {
  if (!v.empty()) ds.putAndInsertString(key, v.c_str());
}
void PutDs(DcmDataset& ds, const DcmTagKey& key, const std::optional<double>& v) {
  if (v) ds.putAndInsertString(key, FormatDs(*v).c_str());
}
void PutIs(DcmDataset& ds, const DcmTagKey& key, const std::optional<double>& v) {
  if (v) ds.putAndInsertString(key, std::to_string(std::lround(*v)).c_str());
}
void PutPair(DcmDataset& ds, const DcmTagKey& key, const std::optional<std::array<double, 2>>& v,
             bool integer = false) {
  if (!v) return;
  auto f = [&](double x) { return integer ? std::to_string(std::lround(x)) : FormatDs(x); };
  ds.putAndInsertString(key, (f((*v)[0]) + "\\" + f((*v)[1])).c_str());
}

void PutIsList(DcmDataset& ds, const DcmTagKey& key, const std::vector<double>& v) {
  if (v.empty()) return;
  std::string text;
  for (double x : v) text += (text.empty() ? "" : "\\") + std::to_string(std::lround(x));
  ds.putAndInsertString(key, text.c_str());
}

std::string NewUid() {
  char uid[100];
  dcmGenerateUniqueIdentifier(uid, SITE_INSTANCE_UID_ROOT);
  return uid;
}

std::string SopClassFor(const RadiographHeader& h) {
  if (!h.sop_class_uid.empty()) return h.sop_class_uid;
  if (h.modality == "CR") return UID_ComputedRadiographyImageStorage;
  if (h.modality.empty() || h.modality == "DX") {
    return h.presentation_intent_type == "FOR PROCESSING"
               ? UID_DigitalXRayImageStorageForProcessing
               : UID_DigitalXRayImageStorageForPresentation;
  }
  return UID_SecondaryCaptureImageStorage;
}

void PutIdentity(DcmDataset& ds, const RadiographHeader& h) {
  ds.putAndInsertString(DCM_SOPClassUID, SopClassFor(h).c_str());
  ds.putAndInsertString(DCM_SOPInstanceUID, (h.sop_instance_uid.empty() ? NewUid() : h.sop_instance_uid).c_str());
  ds.putAndInsertString(DCM_StudyInstanceUID, (h.study_instance_uid.empty() ? NewUid() : h.study_instance_uid).c_str());
  ds.putAndInsertString(DCM_SeriesInstanceUID, (h.series_instance_uid.empty() ? NewUid() : h.series_instance_uid).c_str());
  ds.putAndInsertString(DCM_Modality, h.modality.empty() ? "DX" : h.modality.c_str());
  // Type 2 patient/study attributes (PS3.3 C.7.1.1, C.7.2.1) are written empty: beamtrim
  // never carries patient identifiers.
  for (const DcmTagKey& k : {DCM_PatientName, DCM_PatientID, DCM_PatientBirthDate, DCM_PatientSex,
                             DCM_ReferringPhysicianName, DCM_StudyID, DCM_StudyTime,
                             DCM_SeriesNumber, DCM_InstanceNumber, DCM_PatientOrientation}) {
    ds.putAndInsertString(k, "");
  }
  ds.putAndInsertString(DCM_AccessionNumber, h.accession_number.c_str());
  ds.putAndInsertString(DCM_StudyDate, h.study_date.c_str());
  PutText(ds, DCM_AcquisitionDate, h.acquisition_date);
  PutText(ds, DCM_ContentDate, h.content_date);
  PutText(ds, DCM_OperatorsName, h.operators_name);
  PutText(ds, DCM_StationName, h.station_name);
  PutText(ds, DCM_InstitutionName, h.institution_name);
  PutText(ds, DCM_Manufacturer, h.manufacturer);
  PutText(ds, DCM_BodyPartExamined, h.body_part_examined);
  PutText(ds, DCM_ViewPosition, h.view_position);
  PutText(ds, DCM_ProtocolName, h.protocol_name);
  PutText(ds, DCM_StudyDescription, h.study_description);
}

void PutAcquisition(DcmDataset& ds, const RadiographHeader& h) {
  bool dx = h.modality.empty() || h.modality == "DX";
  if (dx) ds.putAndInsertString(DCM_ImageType, "ORIGINAL\\PRIMARY");
  std::string intent = h.presentation_intent_type;
  if (intent.empty() && dx) intent = "FOR PRESENTATION";  // type 1 in the DX Series module
  PutText(ds, DCM_PresentationIntentType, intent);
  PutText(ds, DCM_PixelIntensityRelationship, h.pixel_intensity_relationship);
  if (h.pixel_intensity_relationship_sign != 0) {
    ds.putAndInsertSint16(DCM_PixelIntensityRelationshipSign, static_cast<Sint16>(h.pixel_intensity_relationship_sign));
  }
  PutPair(ds, DCM_ImagerPixelSpacing, h.imager_pixel_spacing);
  PutPair(ds, DCM_PixelSpacing, h.pixel_spacing);
  PutText(ds, DCM_PixelSpacingCalibrationType, h.pixel_spacing_calibration_type);
  PutDs(ds, DCM_EstimatedRadiographicMagnificationFactor, h.estimated_magnification);
  PutDs(ds, DCM_DistanceSourceToDetector, h.distance_source_to_detector_mm);
  PutDs(ds, DCM_DistanceSourceToPatient, h.distance_source_to_patient_mm);
  PutPair(ds, DCM_DetectorActiveDimensions, h.detector_active_dimensions_mm);
  PutPair(ds, DCM_FieldOfViewOrigin, h.field_of_view_origin);
  PutPair(ds, DCM_FieldOfViewDimensions, h.field_of_view_dimensions_mm, /*integer=*/true);
  PutDs(ds, DCM_FieldOfViewRotation, h.field_of_view_rotation_deg);
  PutText(ds, DCM_FieldOfViewHorizontalFlip, h.field_of_view_horizontal_flip);
  PutText(ds, DCM_CollimatorShape, h.collimator_shape);
  if (h.collimator_edges) {  // IS values (PS3.3 C.8.7.3)
    PutIs(ds, DCM_CollimatorLeftVerticalEdge, h.collimator_edges->left);
    PutIs(ds, DCM_CollimatorRightVerticalEdge, h.collimator_edges->right);
    PutIs(ds, DCM_CollimatorUpperHorizontalEdge, h.collimator_edges->upper);
    PutIs(ds, DCM_CollimatorLowerHorizontalEdge, h.collimator_edges->lower);
  }
  PutText(ds, DCM_ShutterShape, h.shutter_shape);
  if (h.shutter_edges) {
    PutIs(ds, DCM_ShutterLeftVerticalEdge, h.shutter_edges->left);
    PutIs(ds, DCM_ShutterRightVerticalEdge, h.shutter_edges->right);
    PutIs(ds, DCM_ShutterUpperHorizontalEdge, h.shutter_edges->upper);
    PutIs(ds, DCM_ShutterLowerHorizontalEdge, h.shutter_edges->lower);
  }
  PutPair(ds, DCM_CenterOfCircularCollimator, h.collimator_circle_center, /*integer=*/true);
  PutIs(ds, DCM_RadiusOfCircularCollimator, h.collimator_circle_radius);
  PutIsList(ds, DCM_VerticesOfThePolygonalCollimator, h.collimator_polygon);
  PutPair(ds, DCM_CenterOfCircularShutter, h.shutter_circle_center, /*integer=*/true);
  PutIs(ds, DCM_RadiusOfCircularShutter, h.shutter_circle_radius);
  PutIsList(ds, DCM_VerticesOfThePolygonalShutter, h.shutter_polygon);
  PutDs(ds, DCM_ImageAndFluoroscopyAreaDoseProduct, h.area_dose_product_dgy_cm2);
  PutDs(ds, DCM_EntranceDoseInmGy, h.entrance_dose_mgy);
  PutDs(ds, DCM_KVP, h.kvp);
  PutIs(ds, DCM_ExposureInuAs, h.exposure_uas);
  PutDs(ds, DCM_ExposureIndex, h.exposure_index);
  PutDs(ds, DCM_TargetExposureIndex, h.target_exposure_index);
  PutDs(ds, DCM_DeviationIndex, h.deviation_index);
}

Result<Layout> CheckPixels(const std::string& file, const RadiographHeader& h,
                           const StoredPixels& p, TransferSyntax syntax) {
  auto bad = [&](std::string why, const DcmTagKey& key) {
    return MakeError(ErrorKind::kInvalidInput, file, std::move(why), TagLabel(key));
  };
  Layout l{h.bits_allocated == 0 ? 16 : h.bits_allocated, h.bits_stored, h.high_bit,
           h.pixel_representation};
  if (l.bits_stored == 0) l.bits_stored = l.bits_allocated;
  if (l.high_bit == 0 && l.bits_stored > 1) l.high_bit = l.bits_stored - 1;  // 0 = unset
  if (p.width <= 0 || p.height <= 0 || p.values.size() != static_cast<size_t>(p.width) * p.height)
    return bad("pixel buffer does not hold width x height values", DCM_PixelData);
  if (h.rows != p.height || h.columns != p.width)
    return bad("header rows/columns differ from the pixel buffer", DCM_Rows);
  if (l.bits_allocated != 8 && l.bits_allocated != 16)
    return bad("writer supports 8 or 16 bits allocated", DCM_BitsAllocated);
  if (l.bits_stored < 1 || l.bits_stored > l.bits_allocated)
    return bad("bits stored outside 1..bits allocated", DCM_BitsStored);
  if (l.high_bit < l.bits_stored - 1 || l.high_bit >= l.bits_allocated)
    return bad("high bit does not fit", DCM_HighBit);
  if (h.samples_per_pixel != 1 || h.number_of_frames != 1)
    return bad("writer writes one grey frame only", DCM_SamplesPerPixel);
  // JPEG process 1 codes 8-bit samples, process 2/4 up to 12 (ITU-T T.81 / PS3.5 A.4.1):
  // the caller must reduce deeper data first; nothing is rescaled silently.
  if (syntax == TransferSyntax::kJpegBaseline && l.bits_stored > 8)
    return bad("JPEG baseline needs bits stored <= 8", DCM_BitsStored);
  if (syntax == TransferSyntax::kJpegExtended && l.bits_stored > 12)
    return bad("JPEG extended needs bits stored <= 12", DCM_BitsStored);
  // DCMTK 3.6.7's bundled CharLS aborts on signed input (an assertion, not an error), so
  // signed data is refused here rather than crashing the process.
  if (l.signed_pixels && (syntax == TransferSyntax::kJpegLsLossless ||
                          syntax == TransferSyntax::kJpegLsNearLossless))
    return bad("JPEG-LS writing supports unsigned pixels only", DCM_PixelRepresentation);
  int64_t lo = l.signed_pixels ? -(int64_t{1} << (l.bits_stored - 1)) : 0;
  int64_t hi = l.signed_pixels ? (int64_t{1} << (l.bits_stored - 1)) - 1 : (int64_t{1} << l.bits_stored) - 1;
  for (int32_t v : p.values) {
    if (v < lo || v > hi) return bad("value " + std::to_string(v) + " outside bits stored range", DCM_PixelData);
  }
  return l;
}

void PutNativePixels(DcmDataset& ds, const RadiographHeader& h, const StoredPixels& p, const Layout& l) {
  ds.putAndInsertUint16(DCM_SamplesPerPixel, 1);
  ds.putAndInsertString(DCM_PhotometricInterpretation,
                        h.photometric_interpretation.empty() ? "MONOCHROME2" : h.photometric_interpretation.c_str());
  ds.putAndInsertUint16(DCM_Rows, static_cast<Uint16>(p.height));
  ds.putAndInsertUint16(DCM_Columns, static_cast<Uint16>(p.width));
  ds.putAndInsertUint16(DCM_BitsAllocated, static_cast<Uint16>(l.bits_allocated));
  ds.putAndInsertUint16(DCM_BitsStored, static_cast<Uint16>(l.bits_stored));
  ds.putAndInsertUint16(DCM_HighBit, static_cast<Uint16>(l.high_bit));
  ds.putAndInsertUint16(DCM_PixelRepresentation, static_cast<Uint16>(l.signed_pixels));
  if (h.rescale_slope != 1.0 || h.rescale_intercept != 0.0) {
    ds.putAndInsertString(DCM_RescaleSlope, FormatDs(h.rescale_slope).c_str());
    ds.putAndInsertString(DCM_RescaleIntercept, FormatDs(h.rescale_intercept).c_str());
    ds.putAndInsertString(DCM_RescaleType, "US");  // unspecified (PS3.3 C.11.1.1.2)
  }
  // PS3.5 8.1.1: the stored bits sit just below High Bit; unused bits are zero.
  uint32_t mask = (1u << l.bits_stored) - 1u;
  int shift = l.high_bit + 1 - l.bits_stored;
  size_t n = p.values.size();
  if (l.bits_allocated == 8) {
    std::vector<Uint8> buf(n);
    for (size_t i = 0; i < n; ++i) buf[i] = static_cast<Uint8>((static_cast<uint32_t>(p.values[i]) & mask) << shift);
    ds.putAndInsertUint8Array(DCM_PixelData, buf.data(), static_cast<unsigned long>(n));
  } else {
    std::vector<Uint16> buf(n);
    for (size_t i = 0; i < n; ++i) buf[i] = static_cast<Uint16>((static_cast<uint32_t>(p.values[i]) & mask) << shift);
    ds.putAndInsertUint16Array(DCM_PixelData, buf.data(), static_cast<unsigned long>(n));
  }
}

// JPEG 2000: the encapsulated format of PS3.5 A.4 with an empty Basic Offset Table item
// followed by one fragment holding the whole codestream (padded to even length).
Status PutJpeg2000(DcmDataset& ds, const std::string& file, const StoredPixels& p,
                   const Layout& l, const WriteOptions& o) {
  bool lossless = o.syntax == TransferSyntax::kJpeg2000Lossless;
  double ratio = std::max(1.5, (100.0 - o.lossy_quality) / 2.0 + 1.0);
  Result<std::vector<uint8_t>> cs =
      EncodeJ2k(p.values, p.width, p.height, l.bits_stored, l.signed_pixels == 1, lossless, ratio);
  if (!cs) return MakeError(cs.error().kind, file, cs.error().reason, TagLabel(DCM_PixelData));
  std::vector<uint8_t>& bytes = *cs;
  if (bytes.size() % 2 != 0) bytes.push_back(0);
  auto* seq = new DcmPixelSequence(DCM_PixelSequenceTag);
  seq->insert(new DcmPixelItem(DCM_PixelItemTag));
  auto* frag = new DcmPixelItem(DCM_PixelItemTag);
  frag->putUint8Array(bytes.data(), static_cast<Uint32>(bytes.size()));
  seq->insert(frag);
  auto* pd = new DcmPixelData(DCM_PixelData);
  pd->putOriginalRepresentation(ToDcmtk(o.syntax), nullptr, seq);
  ds.insert(pd, /*replaceOld=*/true);
  if (!lossless) {  // PS3.3 C.7.6.1.1.5 lossy compression attributes
    ds.putAndInsertString(DCM_LossyImageCompression, "01");
    ds.putAndInsertString(DCM_LossyImageCompressionRatio, FormatDs(ratio).c_str());
    ds.putAndInsertString(DCM_LossyImageCompressionMethod, "ISO_15444_1");
  }
  return Status::Ok();
}

Status Encode(DcmDataset& ds, const std::string& file, const WriteOptions& o) {
  std::unique_ptr<DcmRepresentationParameter> param;
  switch (o.syntax) {
    case TransferSyntax::kRle: param = std::make_unique<DcmRLERepresentationParameter>(); break;
    case TransferSyntax::kJpegBaseline:
    case TransferSyntax::kJpegExtended: param = std::make_unique<DJ_RPLossy>(o.lossy_quality); break;
    case TransferSyntax::kJpegLossless: param = std::make_unique<DJ_RPLossless>(1, 0); break;
    case TransferSyntax::kJpegLsLossless: param = std::make_unique<DJLSRepresentationParameter>(0, OFTrue); break;
    case TransferSyntax::kJpegLsNearLossless: param = std::make_unique<DJLSRepresentationParameter>(2, OFFalse); break;
    default: return Status::Ok();  // native syntaxes are written as they are
  }
  E_TransferSyntax xfer = ToDcmtk(o.syntax);
  OFCondition cond = ds.chooseRepresentation(xfer, param.get());
  if (cond.bad() || !ds.canWriteXfer(xfer)) {
    return MakeError(ErrorKind::kInvalidInput, file,
                     std::string(TransferSyntaxName(o.syntax)) + " encoding failed: " + cond.text(),
                     TagLabel(DCM_PixelData));
  }
  return Status::Ok();
}

}  // namespace

Status WriteRadiograph(const RadiographHeader& header, const StoredPixels& pixels,
                       const fs::path& file, const WriteOptions& options) {
  RegisterDicomCodecs();
  std::string name = file.string();
  if (!options.with_meta_header && options.syntax != TransferSyntax::kImplicitLittle) {
    return MakeError(ErrorKind::kInvalidInput, name,
                     "a data set without meta header can only be implicit VR little endian");
  }
  Result<Layout> layout = CheckPixels(name, header, pixels, options.syntax);
  if (!layout) return layout.error();
  try {
    DcmFileFormat ff;
    DcmDataset& ds = *ff.getDataset();
    PutIdentity(ds, header);
    PutAcquisition(ds, header);
    PutNativePixels(ds, header, pixels, *layout);
    bool j2k = options.syntax == TransferSyntax::kJpeg2000Lossless ||
               options.syntax == TransferSyntax::kJpeg2000;
    Status s = j2k ? PutJpeg2000(ds, name, pixels, *layout, options) : Encode(ds, name, options);
    if (!s) return s;
    E_TransferSyntax xfer = ToDcmtk(options.syntax);
    OFCondition cond = ff.saveFile(name.c_str(), xfer, EET_ExplicitLength, EGL_recalcGL,
                                   EPD_noChange, 0, 0,
                                   options.with_meta_header ? EWM_fileformat : EWM_dataset);
    if (cond.bad()) return MakeError(ErrorKind::kUnreadable, name, std::string("cannot write: ") + cond.text());
  } catch (const std::exception& e) {
    return MakeError(ErrorKind::kInternal, name, e.what());
  }
  return Status::Ok();
}

}  // namespace beamtrim
