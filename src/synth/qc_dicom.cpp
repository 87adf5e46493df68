// Writes a synthetic QC exposure as a DX file: raw (FOR PROCESSING, LIN, 14 bits) or
// processed (FOR PRESENTATION, LOG, 12 bits), with SID, imager pixel spacing, room and date.
// Everything in the header is invented (fictional room code, no patient).
#include <algorithm>
#include <cmath>

#include "beamtrim/dicom_writer.h"
#include "beamtrim/synth_qc.h"

namespace beamtrim {

Status WriteQcExposureDicom(const QcExposure& exposure, const QcExposureSpec& spec,
                            const QcDicomInfo& info, const std::filesystem::path& file) {
  RadiographHeader h;
  h.modality = "DX";
  h.presentation_intent_type = exposure.linear ? "FOR PROCESSING" : "FOR PRESENTATION";
  h.photometric_interpretation = "MONOCHROME2";
  h.pixel_intensity_relationship = exposure.linear ? "LIN" : "LOG";
  h.pixel_intensity_relationship_sign = 1;
  h.rows = exposure.image.height();
  h.columns = exposure.image.width();
  h.bits_allocated = 16;
  h.bits_stored = exposure.linear ? 14 : 12;
  h.high_bit = h.bits_stored - 1;
  h.imager_pixel_spacing = std::array<double, 2>{exposure.pixel_mm, exposure.pixel_mm};
  if (info.write_sid) h.distance_source_to_detector_mm = exposure.sid_mm;
  h.station_name = info.station;
  h.study_date = info.date;
  h.content_date = info.date;
  h.institution_name = "Synthetic Clinic (invented)";
  h.body_part_examined = "";
  h.protocol_name = "QC LIGHT FIELD";
  h.study_description = "QC light field / x-ray field (synthetic)";
  h.kvp = 70.0;
  if (info.declare_collimator) {
    h.collimator_shape = "RECTANGULAR";
    h.collimator_edges = DeclaredEdges{
        std::round(QcEdgeToPixel(spec, Side::kLeft, spec.xray_mm[0])),
        std::round(QcEdgeToPixel(spec, Side::kRight, spec.xray_mm[1])),
        std::round(QcEdgeToPixel(spec, Side::kTop, spec.xray_mm[2])),
        std::round(QcEdgeToPixel(spec, Side::kBottom, spec.xray_mm[3]))};
  }
  StoredPixels pixels;
  pixels.width = h.columns;
  pixels.height = h.rows;
  pixels.values.reserve(exposure.image.size());
  int max_value = (1 << h.bits_stored) - 1;
  for (size_t i = 0; i < exposure.image.size(); ++i) {
    int v = static_cast<int>(std::lround(exposure.image.data()[i]));
    pixels.values.push_back(std::min(std::max(v, 0), max_value));
  }
  return WriteRadiograph(h, pixels, file);
}

}  // namespace beamtrim
