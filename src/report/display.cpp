// Display windowing, PNG encoding and base64: the raster side of overlays.
#include <algorithm>
#include <cmath>
#include <fstream>
#include <limits>

#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "beamtrim/overlay.h"

namespace beamtrim {
namespace {

// Small positive floor before the logarithm: raw detectors can report zero or negative
// values after offset correction.
constexpr double kLogFloor = 1e-3;

double ToWindowDomain(double value, bool log_domain) {
  return log_domain ? std::log(std::max(value, kLogFloor)) : value;
}

// Pixels to sample for the percentiles: every pixel of a small image, a regular grid of about
// 250 000 samples of a large one (percentiles of a detector image are stable at that density).
std::vector<double> SamplePixels(const Image& image, const Polygon& region, bool log_domain) {
  const int64_t total = static_cast<int64_t>(image.width()) * image.height();
  const int step = std::max(1, static_cast<int>(std::sqrt(static_cast<double>(total) / 250000.0)));
  cv::Mat mask;
  if (region.size() >= 3) {
    mask = cv::Mat::zeros(image.height(), image.width(), CV_8U);
    std::vector<cv::Point> pts;
    for (const Point2d& p : region) pts.emplace_back(cvRound(p.x), cvRound(p.y));
    cv::fillPoly(mask, std::vector<std::vector<cv::Point>>{pts}, cv::Scalar(255));
  }
  std::vector<double> values;
  values.reserve(static_cast<size_t>(total / (static_cast<int64_t>(step) * step) + 1));
  for (int y = 0; y < image.height(); y += step) {
    const float* row = image.row(y);
    const uint8_t* m = mask.empty() ? nullptr : mask.ptr<uint8_t>(y);
    for (int x = 0; x < image.width(); x += step) {
      if (m != nullptr && m[x] == 0) continue;
      if (!std::isfinite(row[x])) continue;
      values.push_back(ToWindowDomain(row[x], log_domain));
    }
  }
  return values;
}

double Percentile(std::vector<double>& values, double percentile) {
  const double rank = std::clamp(percentile, 0.0, 100.0) / 100.0 * (values.size() - 1);
  const size_t k = static_cast<size_t>(std::floor(rank));
  std::nth_element(values.begin(), values.begin() + static_cast<long>(k), values.end());
  return values[k];
}

}  // namespace

DisplayWindow ComputeDisplayWindow(const Image& image, bool linear, const Polygon& region,
                                   double low_percentile, double high_percentile) {
  DisplayWindow window;
  window.log_domain = linear;
  if (image.empty()) return window;
  std::vector<double> values = SamplePixels(image, region, linear);
  if (values.size() < 16 && region.size() >= 3) values = SamplePixels(image, {}, linear);
  if (values.empty()) return window;
  window.low = Percentile(values, low_percentile);
  window.high = Percentile(values, high_percentile);
  if (!(window.high > window.low)) window.high = window.low + 1.0;  // flat image: mid grey
  return window;
}

std::vector<uint8_t> ApplyDisplayWindow(const Image& image, const DisplayWindow& window) {
  std::vector<uint8_t> out(image.size());
  const double span = window.high - window.low;
  for (int y = 0; y < image.height(); ++y) {
    const float* row = image.row(y);
    uint8_t* dst = out.data() + static_cast<size_t>(y) * image.width();
    for (int x = 0; x < image.width(); ++x) {
      const double v = std::isfinite(row[x]) ? ToWindowDomain(row[x], window.log_domain)
                                             : window.low;
      const double t = std::clamp((v - window.low) / span, 0.0, 1.0);
      dst[x] = static_cast<uint8_t>(std::lround(255.0 * (1.0 - t)));
    }
  }
  return out;
}

Result<std::vector<uint8_t>> EncodePng(const RgbImage& image) {
  if (image.width <= 0 || image.height <= 0 ||
      image.rgb.size() != static_cast<size_t>(image.width) * image.height * 3) {
    return MakeError(ErrorKind::kInternal, "", "PNG encoder: raster size does not match");
  }
  try {
    cv::Mat rgb(image.height, image.width, CV_8UC3, const_cast<uint8_t*>(image.rgb.data()));
    cv::Mat bgr;
    cv::cvtColor(rgb, bgr, cv::COLOR_RGB2BGR);
    std::vector<uint8_t> bytes;
    if (!cv::imencode(".png", bgr, bytes, {cv::IMWRITE_PNG_COMPRESSION, 6})) {
      return MakeError(ErrorKind::kInternal, "", "PNG encoder failed");
    }
    return bytes;
  } catch (const cv::Exception& e) {
    return MakeError(ErrorKind::kInternal, "", std::string("PNG encoder: ") + e.what());
  }
}

Status WriteFileBytes(const std::filesystem::path& file, const std::vector<uint8_t>& bytes) {
  std::ofstream out(file, std::ios::binary | std::ios::trunc);
  if (!out) return MakeError(ErrorKind::kUnreadable, file.string(), "cannot open for writing");
  out.write(reinterpret_cast<const char*>(bytes.data()), static_cast<std::streamsize>(bytes.size()));
  out.close();
  if (!out) return MakeError(ErrorKind::kUnreadable, file.string(), "write failed (disk full?)");
  return Status::Ok();
}

std::string Base64Encode(const std::vector<uint8_t>& bytes) {
  static constexpr char kAlphabet[] =
      "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
  std::string out;
  out.reserve((bytes.size() + 2) / 3 * 4);
  size_t i = 0;
  for (; i + 2 < bytes.size(); i += 3) {
    const uint32_t v = (bytes[i] << 16) | (bytes[i + 1] << 8) | bytes[i + 2];
    out += kAlphabet[(v >> 18) & 63];
    out += kAlphabet[(v >> 12) & 63];
    out += kAlphabet[(v >> 6) & 63];
    out += kAlphabet[v & 63];
  }
  const size_t rest = bytes.size() - i;
  if (rest > 0) {
    const uint32_t v = (bytes[i] << 16) | (rest == 2 ? bytes[i + 1] << 8 : 0);
    out += kAlphabet[(v >> 18) & 63];
    out += kAlphabet[(v >> 12) & 63];
    out += rest == 2 ? kAlphabet[(v >> 6) & 63] : '=';
    out += '=';
  }
  return out;
}

}  // namespace beamtrim
