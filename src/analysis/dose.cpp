// Dose figures from the header: KAP, avoidable KAP, exposure index and deviation index.
// Estimates for quality improvement, not patient dose records (docs/metrics.md, "Dose").
#include <cmath>
#include <sstream>

#include "beamtrim/metrics.h"

namespace beamtrim {

double DeviationIndex(double exposure_index, double target_exposure_index) {
  return 10.0 * std::log10(exposure_index / target_exposure_index);
}

std::string DeviationIndexRange(double di) {
  // AAPM TG-116 (Shepard et al. 2009), from memory: +-0.5 on target, > +1 overexposed,
  // > +3 excessive, < -1 underexposed, < -3 consider a repeat.
  if (di > 3.0) return "excessive exposure (DI above +3, AAPM TG-116)";
  if (di > 1.0) return "overexposed (DI above +1, AAPM TG-116)";
  if (di > 0.5) return "slightly above target (DI +0.5 to +1, AAPM TG-116)";
  if (di >= -0.5) return "on target (DI within +-0.5, AAPM TG-116)";
  if (di >= -1.0) return "slightly below target (DI -0.5 to -1, AAPM TG-116)";
  if (di >= -3.0) return "underexposed (DI below -1, AAPM TG-116)";
  return "underexposed, consider a repeat (DI below -3, AAPM TG-116)";
}

DoseMeasurement ComputeDose(const RadiographHeader& header, std::optional<double> excess_fraction) {
  DoseMeasurement d;
  if (header.area_dose_product_dgy_cm2 && *header.area_dose_product_dgy_cm2 >= 0.0) {
    d.kap_dgy_cm2 = header.area_dose_product_dgy_cm2;
  }
  // KAP is the same in every plane along the beam (IAEA TRS-457), so at a uniform kerma the
  // part of it that fell on the excess area is KAP x (excess area / field area).
  if (d.kap_dgy_cm2 && excess_fraction) d.avoidable_kap_dgy_cm2 = *d.kap_dgy_cm2 * *excess_fraction;
  d.exposure_index = header.exposure_index;
  d.target_exposure_index = header.target_exposure_index;
  if (header.deviation_index) {
    d.deviation_index = header.deviation_index;
  } else if (d.exposure_index && d.target_exposure_index && *d.exposure_index > 0.0 &&
             *d.target_exposure_index > 0.0) {
    d.deviation_index = DeviationIndex(*d.exposure_index, *d.target_exposure_index);
    d.deviation_index_computed = true;
  }
  if (d.deviation_index) d.deviation_index_range = DeviationIndexRange(*d.deviation_index);
  return d;
}

}  // namespace beamtrim
