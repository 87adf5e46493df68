// RadiographHeader: extraction from a DCMTK data set and the derived quantities
// (detector spacing, magnification, study month) with the precedence in docs/dicom.md.
#include <cctype>
#include <cmath>
#include <cstdio>

#include "dicom/dicom_internal.h"

namespace beamtrim {
namespace dicom_internal {

std::string TagLabel(const DcmTagKey& key) {
  char buf[16];
  std::snprintf(buf, sizeof buf, "(%04X,%04X)", key.getGroup(), key.getElement());
  DcmTag tag(key);
  const char* name = tag.getTagName();
  std::string out = buf;
  if (name != nullptr && std::string(name) != DcmTag_ERROR_TagName) out += std::string(" ") + name;
  return out;
}

std::string GetString(DcmItem& item, const DcmTagKey& key, unsigned long index) {
  OFString value;
  if (item.findAndGetOFString(key, value, index).bad()) return {};
  std::string s = value.c_str();
  while (!s.empty() && (s.back() == ' ' || s.back() == '\0')) s.pop_back();
  size_t start = s.find_first_not_of(' ');
  return start == std::string::npos ? std::string() : s.substr(start);
}

static std::string GetAllValues(DcmItem& item, const DcmTagKey& key) {
  OFString value;
  if (item.findAndGetOFStringArray(key, value).bad()) return {};
  std::string s = value.c_str();
  while (!s.empty() && (s.back() == ' ' || s.back() == '\0')) s.pop_back();
  return s;
}

std::optional<double> GetDouble(DcmItem& item, const DcmTagKey& key, unsigned long index) {
  // DS/IS are text and FD/FL binary: getOFString works for both, so parse the text form.
  std::string s = GetString(item, key, index);
  if (s.empty()) return std::nullopt;
  char* end = nullptr;
  double v = std::strtod(s.c_str(), &end);
  if (end == s.c_str() || !std::isfinite(v)) return std::nullopt;
  return v;
}

std::optional<long> GetInt(DcmItem& item, const DcmTagKey& key) {
  Uint16 us = 0;
  if (item.findAndGetUint16(key, us).good()) return static_cast<long>(us);
  std::optional<double> v = GetDouble(item, key);
  if (!v || std::fabs(*v) > 2e9) return std::nullopt;
  return static_cast<long>(std::lround(*v));
}

std::optional<std::array<double, 2>> GetPair(DcmItem& item, const DcmTagKey& key) {
  std::optional<double> a = GetDouble(item, key, 0);
  std::optional<double> b = GetDouble(item, key, 1);
  if (!a) return std::nullopt;
  return std::array<double, 2>{*a, b ? *b : *a};
}

static std::optional<DeclaredEdges> GetEdges(DcmItem& item, const DcmTagKey& left,
                                             const DcmTagKey& right, const DcmTagKey& upper,
                                             const DcmTagKey& lower) {
  std::optional<double> l = GetDouble(item, left), r = GetDouble(item, right);
  std::optional<double> u = GetDouble(item, upper), d = GetDouble(item, lower);
  if (!l || !r || !u || !d) return std::nullopt;  // PS3.3 C.8.7.3 / C.7.6.11: all four together
  return DeclaredEdges{*l, *r, *u, *d};
}

static std::vector<double> GetAll(DcmItem& item, const DcmTagKey& key) {
  std::vector<double> out;
  DcmElement* elem = nullptr;
  if (item.findAndGetElement(key, elem).bad() || elem == nullptr) return out;
  for (unsigned long i = 0; i < elem->getVM(); ++i) {
    std::optional<double> v = GetDouble(item, key, i);
    if (!v) return {};
    out.push_back(*v);
  }
  return out;
}

static void ExtractImagePixel(DcmDataset& ds, RadiographHeader& h) {
  h.photometric_interpretation = GetString(ds, DCM_PhotometricInterpretation);
  h.rows = static_cast<int>(GetInt(ds, DCM_Rows).value_or(0));
  h.columns = static_cast<int>(GetInt(ds, DCM_Columns).value_or(0));
  h.bits_allocated = static_cast<int>(GetInt(ds, DCM_BitsAllocated).value_or(0));
  h.bits_stored = static_cast<int>(GetInt(ds, DCM_BitsStored).value_or(h.bits_allocated));
  h.high_bit = static_cast<int>(GetInt(ds, DCM_HighBit).value_or(h.bits_stored - 1));
  h.pixel_representation = static_cast<int>(GetInt(ds, DCM_PixelRepresentation).value_or(0));
  h.samples_per_pixel = static_cast<int>(GetInt(ds, DCM_SamplesPerPixel).value_or(1));
  h.number_of_frames = static_cast<int>(GetInt(ds, DCM_NumberOfFrames).value_or(1));
  h.rescale_slope = GetDouble(ds, DCM_RescaleSlope).value_or(1.0);
  h.rescale_intercept = GetDouble(ds, DCM_RescaleIntercept).value_or(0.0);
  h.pixel_intensity_relationship = GetString(ds, DCM_PixelIntensityRelationship);
  if (std::optional<long> sign = GetInt(ds, DCM_PixelIntensityRelationshipSign)) {
    // SS in PS3.6; findAndGetUint16 would misread -1, so re-read as signed.
    Sint16 ss = 0;
    if (ds.findAndGetSint16(DCM_PixelIntensityRelationshipSign, ss).good()) *sign = ss;
    h.pixel_intensity_relationship_sign = *sign < 0 ? -1 : (*sign > 0 ? 1 : 0);
  }
}

static void ExtractGeometry(DcmDataset& ds, RadiographHeader& h) {
  h.imager_pixel_spacing = GetPair(ds, DCM_ImagerPixelSpacing);
  h.pixel_spacing = GetPair(ds, DCM_PixelSpacing);
  h.pixel_spacing_calibration_type = GetString(ds, DCM_PixelSpacingCalibrationType);
  h.estimated_magnification = GetDouble(ds, DCM_EstimatedRadiographicMagnificationFactor);
  h.distance_source_to_detector_mm = GetDouble(ds, DCM_DistanceSourceToDetector);
  h.distance_source_to_patient_mm = GetDouble(ds, DCM_DistanceSourceToPatient);
  h.detector_active_dimensions_mm = GetPair(ds, DCM_DetectorActiveDimensions);
  h.field_of_view_origin = GetPair(ds, DCM_FieldOfViewOrigin);
  h.field_of_view_dimensions_mm = GetPair(ds, DCM_FieldOfViewDimensions);
  h.field_of_view_rotation_deg = GetDouble(ds, DCM_FieldOfViewRotation);
  h.field_of_view_horizontal_flip = GetString(ds, DCM_FieldOfViewHorizontalFlip);
  h.collimator_shape = GetAllValues(ds, DCM_CollimatorShape);
  h.collimator_edges =
      GetEdges(ds, DCM_CollimatorLeftVerticalEdge, DCM_CollimatorRightVerticalEdge,
               DCM_CollimatorUpperHorizontalEdge, DCM_CollimatorLowerHorizontalEdge);
  h.shutter_shape = GetAllValues(ds, DCM_ShutterShape);
  h.shutter_edges = GetEdges(ds, DCM_ShutterLeftVerticalEdge, DCM_ShutterRightVerticalEdge,
                             DCM_ShutterUpperHorizontalEdge, DCM_ShutterLowerHorizontalEdge);
  if (GetDouble(ds, DCM_CenterOfCircularCollimator, 1)) {
    h.collimator_circle_center = GetPair(ds, DCM_CenterOfCircularCollimator);
  }
  h.collimator_circle_radius = GetDouble(ds, DCM_RadiusOfCircularCollimator);
  h.collimator_polygon = GetAll(ds, DCM_VerticesOfThePolygonalCollimator);
  if (GetDouble(ds, DCM_CenterOfCircularShutter, 1)) {
    h.shutter_circle_center = GetPair(ds, DCM_CenterOfCircularShutter);
  }
  h.shutter_circle_radius = GetDouble(ds, DCM_RadiusOfCircularShutter);
  h.shutter_polygon = GetAll(ds, DCM_VerticesOfThePolygonalShutter);
  // PS3.3: vertices come in row\column pairs; an odd count is not a polygon.
  if (h.collimator_polygon.size() % 2 != 0) h.collimator_polygon.clear();
  if (h.shutter_polygon.size() % 2 != 0) h.shutter_polygon.clear();
}

static void ExtractDose(DcmDataset& ds, RadiographHeader& h) {
  h.area_dose_product_dgy_cm2 = GetDouble(ds, DCM_ImageAndFluoroscopyAreaDoseProduct);
  h.entrance_dose_mgy = GetDouble(ds, DCM_EntranceDoseInmGy);
  h.kvp = GetDouble(ds, DCM_KVP);
  h.exposure_uas = GetDouble(ds, DCM_ExposureInuAs);
  if (!h.exposure_uas) {
    // Exposure (0018,1152) is in mAs (PS3.3 C.8.7.2); convert to the uAs field.
    if (std::optional<double> mas = GetDouble(ds, DCM_Exposure)) h.exposure_uas = *mas * 1000.0;
  }
  h.exposure_index = GetDouble(ds, DCM_ExposureIndex);
  h.target_exposure_index = GetDouble(ds, DCM_TargetExposureIndex);
  h.deviation_index = GetDouble(ds, DCM_DeviationIndex);
}

static void ExtractContext(DcmDataset& ds, RadiographHeader& h) {
  h.sop_instance_uid = GetString(ds, DCM_SOPInstanceUID);
  h.sop_class_uid = GetString(ds, DCM_SOPClassUID);
  h.study_instance_uid = GetString(ds, DCM_StudyInstanceUID);
  h.series_instance_uid = GetString(ds, DCM_SeriesInstanceUID);
  h.accession_number = GetString(ds, DCM_AccessionNumber);
  h.modality = GetString(ds, DCM_Modality);
  h.presentation_intent_type = GetString(ds, DCM_PresentationIntentType);
  h.operators_name = GetAllValues(ds, DCM_OperatorsName);
  h.station_name = GetString(ds, DCM_StationName);
  h.institution_name = GetString(ds, DCM_InstitutionName);
  h.manufacturer = GetString(ds, DCM_Manufacturer);
  h.body_part_examined = GetString(ds, DCM_BodyPartExamined);
  h.view_position = GetString(ds, DCM_ViewPosition);
  h.protocol_name = GetString(ds, DCM_ProtocolName);
  h.study_description = GetString(ds, DCM_StudyDescription);
  h.study_date = GetString(ds, DCM_StudyDate);
  h.acquisition_date = GetString(ds, DCM_AcquisitionDate);
  h.content_date = GetString(ds, DCM_ContentDate);
}

RadiographHeader ExtractHeader(DcmDataset& dataset) {
  RadiographHeader h;
  ExtractContext(dataset, h);
  ExtractImagePixel(dataset, h);
  ExtractGeometry(dataset, h);
  ExtractDose(dataset, h);
  return h;
}

}  // namespace dicom_internal

namespace {

bool Positive(const std::array<double, 2>& v) {
  return v[0] > 0.0 && v[1] > 0.0 && std::isfinite(v[0]) && std::isfinite(v[1]);
}

// "YYYYMMDD" (DA, PS3.5 6.2) or the ACR-NEMA "YYYY.MM.DD" form -> "YYYY-MM".
std::string MonthOf(const std::string& date) {
  std::string digits;
  for (char c : date) {
    if (std::isdigit(static_cast<unsigned char>(c))) digits += c;
    else if (c != '.') return {};
  }
  if (digits.size() != 8) return {};
  int month = std::stoi(digits.substr(4, 2));
  if (month < 1 || month > 12) return {};
  return digits.substr(0, 4) + "-" + digits.substr(4, 2);
}

}  // namespace

std::optional<double> RadiographHeader::Magnification() const {
  // M = SID / SOD (point source, straight rays; radiologic physics texts such as Bushberg).
  if (distance_source_to_detector_mm && distance_source_to_patient_mm &&
      *distance_source_to_patient_mm > 0.0 &&
      *distance_source_to_detector_mm >= *distance_source_to_patient_mm) {
    return *distance_source_to_detector_mm / *distance_source_to_patient_mm;
  }
  if (estimated_magnification && *estimated_magnification >= 1.0 &&
      std::isfinite(*estimated_magnification)) {
    return *estimated_magnification;
  }
  return std::nullopt;
}

std::optional<std::array<double, 2>> RadiographHeader::DetectorSpacing() const {
  // DICOM PS3.3, DX Detector module (C.8.11.4, section number from memory): Imager Pixel
  // Spacing is measured at the front plane of the detector, so it wins whenever present.
  if (imager_pixel_spacing && Positive(*imager_pixel_spacing)) return imager_pixel_spacing;
  if (!pixel_spacing || !Positive(*pixel_spacing)) return std::nullopt;
  // DICOM PS3.3 Basic Pixel Spacing Calibration Macro (section 10.7, from memory): GEOMETRY
  // and FIDUCIAL mean Pixel Spacing was calibrated to a plane inside the patient; going back
  // to the detector multiplies by the magnification (w_detector = M * w_object).
  if (pixel_spacing_calibration_type == "GEOMETRY" ||
      pixel_spacing_calibration_type == "FIDUCIAL") {
    std::optional<double> m = Magnification();
    if (!m) return std::nullopt;
    return std::array<double, 2>{(*pixel_spacing)[0] * *m, (*pixel_spacing)[1] * *m};
  }
  // No calibration type: the spacing is taken as that of the detector plane (common
  // practice, no single source: uncalibrated projection images carry the detector pitch).
  return pixel_spacing;
}

std::string RadiographHeader::StudyMonth() const {
  for (const std::string* d : {&study_date, &acquisition_date, &content_date}) {
    std::string m = MonthOf(*d);
    if (!m.empty()) return m;
  }
  return {};
}

}  // namespace beamtrim
