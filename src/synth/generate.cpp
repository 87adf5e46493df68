// Generate(): render, expose, crop, process, quantise and label one synthetic radiograph.
#include <algorithm>
#include <cmath>
#include <random>

#include <opencv2/imgproc.hpp>

#include "synth/model.h"
#include "synth/phantom.h"
#include "synth/render.h"
#include "synth/scenario_internal.h"
#include "synth/synth_internal.h"

namespace beamtrim {
namespace synth_internal {
namespace {

// Value range that the stored integers can express after the rescale (modality values).
struct ValueRange {
  double lo, hi;
};
ValueRange RangeOf(const SynthScenario& sc) {
  double smin = sc.signed_pixels ? -std::ldexp(1.0, sc.bits_stored - 1) : 0.0;
  double smax = sc.signed_pixels ? std::ldexp(1.0, sc.bits_stored - 1) - 1 : std::ldexp(1.0, sc.bits_stored) - 1;
  return {sc.rescale_slope * smin + sc.rescale_intercept, sc.rescale_slope * smax + sc.rescale_intercept};
}

double Percentile(std::vector<float> v, double q) {
  if (v.empty()) return 0.0;
  size_t k = static_cast<size_t>(std::clamp(q, 0.0, 1.0) * (v.size() - 1));
  std::nth_element(v.begin(), v.begin() + static_cast<long>(k), v.end());
  return v[k];
}

// Crops the receptor-grid image to the kept window.
Image Crop(const Image& full, const PixelWindow& w) {
  Image out(w.w, w.h);
  for (int y = 0; y < w.h; ++y) {
    std::copy_n(full.row(y + w.y0) + w.x0, w.w, out.row(y));
  }
  return out;
}

// Pixels of the image whose centre lies in the electronic mask.
bool Masked(const SynthScenario& sc, const PixelWindow& w, int x, int y) {
  double xm = (x + w.x0 + 0.5) * sc.pixel_mm, ym = (y + w.y0 + 0.5) * sc.pixel_mm;
  const auto& b = sc.blank;
  return (b[0].active && xm < b[0].inset_mm) ||
         (b[1].active && xm > sc.receptor_width_mm - b[1].inset_mm) ||
         (b[2].active && ym < b[2].inset_mm) ||
         (b[3].active && ym > sc.receptor_height_mm - b[3].inset_mm);
}

// Field membership per image pixel (collimator transmission above one half).
std::vector<uint8_t> FieldMask(const SynthScenario& sc, const PixelWindow& w) {
  std::vector<uint8_t> mask(static_cast<size_t>(w.w) * w.h);
  FieldFrame f(sc);
  for (int y = 0; y < w.h; ++y) {
    for (int x = 0; x < w.w; ++x) {
      auto in = InsideDistances(sc, f, (x + w.x0 + 0.5) * sc.pixel_mm, (y + w.y0 + 0.5) * sc.pixel_mm);
      mask[static_cast<size_t>(y) * w.w + x] = *std::min_element(in.begin(), in.end()) > 0.0;
    }
  }
  return mask;
}

// Raw output: modality value proportional to detector kerma, plus electronic noise.
Image RawValues(const SynthScenario& sc, const Image& kerma, std::mt19937_64& rng) {
  ValueRange r = RangeOf(sc);
  std::vector<float> all(kerma.data(), kerma.data() + kerma.size());
  double kmax = std::max(1e-6, Percentile(all, 0.999) * 1.15);
  double gain = 0.9 * r.hi / kmax;
  std::normal_distribution<double> noise(0.0, sc.noise ? sc.electronic_noise : 0.0);
  Image v(kerma.width(), kerma.height());
  for (size_t i = 0; i < kerma.size(); ++i) {
    v.data()[i] = static_cast<float>(std::clamp(kerma.data()[i] * gain + noise(rng), std::max(r.lo, 0.0), r.hi));
  }
  return v;
}

// Processed output in 0..1 (larger = more radiation): log, unsharp mask, window on the field.
Image ProcessedValues(const SynthScenario& sc, const Image& kerma, const std::vector<uint8_t>& field,
                      std::mt19937_64& rng) {
  cv::Mat log(kerma.height(), kerma.width(), CV_32F);
  std::vector<float> all(kerma.data(), kerma.data() + kerma.size());
  double floor = std::max(1e-4, Percentile(all, 0.5) * 1e-3);
  float* lp = log.ptr<float>(0);  // continuous: one row after another
  for (size_t i = 0; i < kerma.size(); ++i)
    lp[i] = static_cast<float>(std::log(std::max<double>(kerma.data()[i], floor)));
  std::uniform_real_distribution<double> amount(0.4, 1.5), radius(4.0, 15.0);
  cv::Mat blur;
  cv::GaussianBlur(log, blur, cv::Size(0, 0), radius(rng) / sc.pixel_mm, 0, cv::BORDER_REPLICATE);
  cv::Mat sharp = log + amount(rng) * (log - blur);
  const float* sp = sharp.ptr<float>(0);
  std::vector<float> inside;
  for (size_t i = 0; i < kerma.size(); ++i) {
    if (field[i]) inside.push_back(sp[i]);
  }
  if (inside.size() < 16) inside.assign(sharp.begin<float>(), sharp.end<float>());
  double lo = Percentile(inside, 0.01), hi = Percentile(inside, 0.995);
  if (hi - lo < 1e-6) hi = lo + 1.0;
  Image out(kerma.width(), kerma.height());
  for (size_t i = 0; i < kerma.size(); ++i) {
    double t = (sp[i] - lo) / (hi - lo);
    // Logistic display curve: a soft toe and shoulder that compress, but never flatten, the
    // collimated plateau and the direct exposure (a flat region would look like masking).
    double s = 1.0 / (1.0 + std::exp(-5.0 * (t - 0.5)));
    out.data()[i] = static_cast<float>(s);
  }
  return out;
}

}  // namespace
}  // namespace synth_internal

SynthImage Generate(const SynthScenario& sc) {
  using namespace synth_internal;
  SynthImage img;
  img.situation = SynthSituationName(sc.situation);
  img.name = ImageName(sc);
  const PixelWindow w = WindowOf(sc);
  SceneObjects scene = BuildScene(sc);
  ExposureMaps maps = RenderExposure(sc, scene, w.receptor_w, w.receptor_h);
  Image kerma(w.receptor_w, w.receptor_h);
  for (size_t i = 0; i < kerma.size(); ++i) kerma.data()[i] = maps.primary.data()[i] + maps.scatter.data()[i];
  if (sc.double_exposure) {
    SynthScenario two = SecondExposure(sc);
    ExposureMaps m2 = RenderExposure(two, BuildScene(two), w.receptor_w, w.receptor_h);
    for (size_t i = 0; i < kerma.size(); ++i) kerma.data()[i] += m2.primary.data()[i] + m2.scatter.data()[i];
  }
  std::mt19937_64 rng(MixSeed(sc.seed, static_cast<uint64_t>(sc.index), 7));
  ApplyDetector(sc, kerma, rng);

  // Exposure index: 100 x detector kerma (uGy) in the region of interest (IEC 62494-1),
  // taken as the median over patient tissue inside the field.
  std::vector<float> roi, field_values;
  {
    FieldFrame f(sc);
    for (int y = 0; y < w.receptor_h; ++y) {
      for (int x = 0; x < w.receptor_w; ++x) {
        auto in = InsideDistances(sc, f, (x + 0.5) * sc.pixel_mm, (y + 0.5) * sc.pixel_mm);
        if (*std::min_element(in.begin(), in.end()) <= 0.0) continue;
        field_values.push_back(kerma.at(x, y));
        if (maps.tissue.at(x, y) > 5.0f) roi.push_back(kerma.at(x, y));
      }
    }
  }
  double ei = 100.0 * Percentile(roi.size() > 16 ? roi : field_values, 0.5);

  Image kept = Crop(kerma, w);
  std::vector<uint8_t> field = FieldMask(sc, w);
  ValueRange range = RangeOf(sc);
  const bool raw = sc.output == SynthOutput::kRaw;
  Image values = raw ? RawValues(sc, kept, rng) : ProcessedValues(sc, kept, field, rng);
  img.stored.width = w.w;
  img.stored.height = w.h;
  img.stored.values.resize(kept.size());
  img.pixels = Image(w.w, w.h);
  for (int y = 0; y < w.h; ++y) {
    for (int x = 0; x < w.w; ++x) {
      double v = values.at(x, y);
      if (Masked(sc, w, x, y)) v = raw ? 0.0 : sc.blank_value;
      // v: modality value (raw) or 0..1 (processed), larger = more radiation.
      double modality = raw ? v : range.lo + v * (range.hi - range.lo);
      bool inverted = !raw && !sc.monochrome1;  // processed MONOCHROME2 stores bone bright
      double written = inverted ? range.hi + range.lo - modality : modality;
      double s = std::round((written - sc.rescale_intercept) / sc.rescale_slope);
      int32_t stored = static_cast<int32_t>(s);
      img.stored.values[static_cast<size_t>(y) * w.w + x] = stored;
      double back = stored * sc.rescale_slope + sc.rescale_intercept;
      img.pixels.at(x, y) = static_cast<float>(inverted ? range.hi + range.lo - back : back);
    }
  }
  img.linear = raw;

  img.header = BuildHeader(sc);
  img.header.exposure_index = std::round(ei);
  img.header.deviation_index =
      std::round(100.0 * 10.0 * std::log10(std::max(ei, 1e-6) / sc.target_exposure_index)) / 100.0;
  img.truth = ComputeTruth(sc);
  {
    const auto [x0, y0, x1, y1] = UnmaskedRectPx(sc, w);
    img.unmasked_px = RectPolygon(x0, y0, x1, y1);
  }
  if (sc.double_exposure) img.second_field_px = ComputeFieldGeometry(SecondExposure(sc)).clipped;
  if (img.truth.dose) {
    img.truth.dose->exposure_index = img.header.exposure_index;
    img.truth.dose->deviation_index = img.header.deviation_index;
  }
  img.field_area_unclipped_mm2 = UnclippedFieldAreaMm2(sc);
  img.air_kerma_detector_mgy = DetectorKermaUgy(sc) / 1000.0;
  img.penumbra_mm = {GeometricPenumbraMm(sc.focal_spot_mm, sc.sid_mm, sc.blade_distance_lr_mm),
                     GeometricPenumbraMm(sc.focal_spot_mm, sc.sid_mm, sc.blade_distance_tb_mm)};
  return img;
}

}  // namespace beamtrim
