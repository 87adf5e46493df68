// Pixel rendering of a scenario: detector air kerma from the primary beam (heel effect,
// inverse square and obliquity, collimator with focal-spot and off-focus penumbra, patient and
// lead attenuation by Beer-Lambert) plus scatter, then the detector (blur, gain, quantum and
// electronic noise). Kerma is in uGy at the detector plane.
#include "synth/render.h"

#include <algorithm>
#include <cmath>
#include <random>

#include <opencv2/imgproc.hpp>

#include "synth/model.h"
#include "synth/phantom.h"
#include "synth/scenario_internal.h"

namespace beamtrim::synth_internal {
namespace {

// Antiderivative of the ramp clamp(0.5 + t / P, 0, 1): the blade shadow of a uniform focal
// spot of projected width P (geometric penumbra), 50 % at t = 0.
double RampIntegral(double t, double P) {
  if (t <= -0.5 * P) return 0.0;
  if (t >= 0.5 * P) return t;
  double k = t + 0.5 * P;
  return k * k / (2.0 * P);
}

}  // namespace

double EdgeTransmission(double inside_mm, double penumbra_mm, double aperture_mm) {
  double P = std::max(penumbra_mm, 1e-9);
  if (aperture_mm <= 0.0) return std::clamp(0.5 + inside_mm / P, 0.0, 1.0);
  double a = 0.5 * aperture_mm;
  return (RampIntegral(inside_mm + a, P) - RampIntegral(inside_mm - a, P)) / aperture_mm;
}

double SmoothEdgeTransmission(double inside_mm, double width_mm) {
  // Width taken as the full width at half maximum of a Gaussian source profile.
  const double sigma = std::max(width_mm, 1e-9) / 2.3548;
  return 0.5 * std::erfc(-inside_mm / (sigma * std::sqrt(2.0)));
}

BeamModel::BeamModel(const SynthScenario& sc) : sc_(sc), frame_(sc) {
  for (int k = 0; k < 4; ++k) {
    double d = k < 2 ? sc.blade_distance_lr_mm : sc.blade_distance_tb_mm;
    focal_[k] = GeometricPenumbraMm(sc.focal_spot_mm, sc.sid_mm, d);
    off_[k] = GeometricPenumbraMm(sc.off_focus_size_mm, sc.sid_mm, d);
  }
  double a = sc.anode_angle_deg * kPi / 180.0;
  ax_ = std::cos(a);
  ay_ = std::sin(a);
  // Heel effect: output falls towards the anode; modelled as exp(-k tan(angle)) with
  // `heel_strength` the relative loss at 15 degrees (shape from memory, no single source).
  heel_k_ = -std::log(1.0 - std::clamp(sc.heel_strength, 0.0, 0.9)) / std::tan(15.0 * kPi / 180.0);
}

double BeamModel::Collimator(double x, double y) const {
  auto in = InsideDistances(sc_, frame_, x, y);
  double focal = 1.0, off = 1.0;
  for (int k = 0; k < 4; ++k) {
    focal *= EdgeTransmission(in[k], focal_[k], sc_.pixel_mm);
    off *= SmoothEdgeTransmission(in[k], off_[k]);
  }
  double open = (1.0 - sc_.off_focus_fraction) * focal + sc_.off_focus_fraction * off;
  return sc_.blade_transmission + (1.0 - sc_.blade_transmission) * open;
}

double BeamModel::Shape(double x, double y) const {
  double dx = x - sc_.ray_x_mm, dy = y - sc_.ray_y_mm;
  double r2 = dx * dx + dy * dy + sc_.sid_mm * sc_.sid_mm;
  // Inverse square times obliquity on a flat detector: (SID / r)^3 = cos^3(theta).
  double cos_t = sc_.sid_mm / std::sqrt(r2);
  double t = (dx * ax_ + dy * ay_) / sc_.sid_mm;
  return cos_t * cos_t * cos_t * std::exp(-heel_k_ * t);
}

double CollimatorTransmission(const SynthScenario& sc, double x, double y) {
  return BeamModel(sc).Collimator(x, y);
}

double BeamShape(const SynthScenario& sc, double x, double y) { return BeamModel(sc).Shape(x, y); }

ExposureMaps RenderExposure(const SynthScenario& sc, const SceneObjects& scene, int width,
                            int height) {
  ExposureMaps out;
  out.primary = Image(width, height);
  out.tissue = Image(width, height);
  const double p = sc.pixel_mm, k0 = DetectorKermaUgy(sc);
  const BeamModel beam(sc);
  for (int y = 0; y < height; ++y) {
    float* pr = out.primary.row(y);
    float* ti = out.tissue.row(y);
    double ym = (y + 0.5) * p;
    for (int x = 0; x < width; ++x) {
      double xm = (x + 0.5) * p;
      double incident = k0 * beam.Shape(xm, ym) * beam.Collimator(xm, ym);
      double li = scene.patient.LineIntegral(xm, ym, sc.kvp) + scene.lead.LineIntegral(xm, ym, sc.kvp);
      pr[x] = static_cast<float>(incident * std::exp(-li));
      ti[x] = static_cast<float>(scene.patient.TissueThickness(xm, ym));
    }
  }
  AddScatter(sc, scene, out);
  return out;
}

void AddScatter(const SynthScenario& sc, const SceneObjects& scene, ExposureMaps& maps) {
  // Scatter source: the part of the incident beam that interacts in the patient, on a coarse
  // grid; spread by a broad Gaussian (width growing with thickness) so it reaches under the
  // blades. Field size and thickness dependence follow from the integral (Bushberg et al.:
  // SPR grows with field size and thickness). Scale: SPR ~ 4-5 for 20 cm of tissue in a large
  // field without a grid, a grid passing ~15 % of scatter (from memory, typical values).
  const double cell = std::max(4.0, sc.pixel_mm);
  int cw = std::max(4, static_cast<int>(std::ceil(maps.primary.width() * sc.pixel_mm / cell)));
  int ch = std::max(4, static_cast<int>(std::ceil(maps.primary.height() * sc.pixel_mm / cell)));
  cv::Mat source(ch, cw, CV_32F);
  const double k0 = DetectorKermaUgy(sc), mu = Mu(Material::kSoft, sc.kvp);
  const BeamModel beam(sc);
  for (int y = 0; y < ch; ++y) {
    for (int x = 0; x < cw; ++x) {
      double xm = (x + 0.5) * cell, ym = (y + 0.5) * cell;
      double t = scene.patient.TissueThickness(xm, ym);
      double incident = k0 * beam.Shape(xm, ym) * beam.Collimator(xm, ym);
      source.at<float>(y, x) = static_cast<float>(incident * (1.0 - std::exp(-mu * t)));
    }
  }
  double sigma_mm = 25.0 + 0.25 * scene.patient.typical_thickness_mm;
  cv::Mat spread;
  cv::GaussianBlur(source, spread, cv::Size(0, 0), sigma_mm / cell, 0, cv::BORDER_CONSTANT);
  double scale = 0.025 * sc.scatter_scale * (sc.grid ? 0.15 : 1.0);
  cv::Mat full;
  cv::resize(spread, full, cv::Size(maps.primary.width(), maps.primary.height()), 0, 0,
             cv::INTER_LINEAR);
  maps.scatter = Image(maps.primary.width(), maps.primary.height());
  for (int y = 0; y < full.rows; ++y) {
    const float* s = full.ptr<float>(y);
    float* d = maps.scatter.row(y);
    for (int x = 0; x < full.cols; ++x) d[x] = static_cast<float>(scale * s[x]);
  }
}

void ApplyDetector(const SynthScenario& sc, Image& kerma, std::mt19937_64& rng) {
  cv::Mat m(kerma.height(), kerma.width(), CV_32F, kerma.data());
  double sigma = sc.detector_blur_mm / sc.pixel_mm;
  if (sigma >= 0.2) cv::GaussianBlur(m, m, cv::Size(0, 0), sigma, 0, cv::BORDER_REPLICATE);
  if (!sc.noise) return;
  // Residual gain: a smooth pattern plus faint column stripes (flat-field leftovers).
  std::uniform_real_distribution<double> phase(0, 2 * kPi), unit(-1, 1);
  double p1 = phase(rng), p2 = phase(rng), f1 = 0.5 + unit(rng) * 0.3, f2 = 0.7 + unit(rng) * 0.3;
  std::vector<float> column(kerma.width());
  for (float& c : column) c = static_cast<float>(1.0 + 0.2 * sc.gain_variation * unit(rng));
  // Quanta per uGy per pixel: ~30 000 photons / (mm2 uGy) for an RQA5-like beam (IEC 62220-1,
  // from memory) times an effective absorption of 0.6.
  const double q = 30000.0 * 0.6 * sc.pixel_mm * sc.pixel_mm;
  std::normal_distribution<double> gauss(0.0, 1.0);
  const double w = kerma.width(), h = kerma.height();
  for (int y = 0; y < kerma.height(); ++y) {
    float* row = kerma.row(y);
    double gy = std::sin(2 * kPi * f2 * y / h + p2);
    for (int x = 0; x < kerma.width(); ++x) {
      double gain = (1.0 + sc.gain_variation * 0.7 * (std::sin(2 * kPi * f1 * x / w + p1) + gy)) * column[x];
      double n = std::max(0.0, static_cast<double>(row[x])) * q;
      double counts;
      if (n < 30.0) {
        counts = static_cast<double>(std::poisson_distribution<long>(n)(rng));
      } else {
        counts = n + std::sqrt(n) * gauss(rng);
      }
      row[x] = static_cast<float>(std::max(0.0, counts) / q * gain);
    }
  }
}

}  // namespace beamtrim::synth_internal
