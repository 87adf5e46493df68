// Radio-opaque marker finding. Metal markers lying on the receptor are compact, strongly
// attenuating and sharp-edged: in the log domain they sit well below their surroundings. A
// grey-level closing with a window wider than any marker rebuilds the image without them
// (blade shadows, penumbra and heel ramps are monotone across the window, so the closing keeps
// them), and the difference is the markers' depth, the same inside and outside the field
// because a marker attenuates whatever reaches it. Connected components of the depth at full
// resolution are the markers; their depth-weighted centroids are unbiased for symmetric shapes.
#include <algorithm>
#include <cmath>

#include <opencv2/imgproc.hpp>

#include "qc/qc_internal.h"

namespace beamtrim::qc_internal {
namespace {

double Median(std::vector<float> values) {
  if (values.empty()) return 0.0;
  size_t mid = values.size() / 2;
  std::nth_element(values.begin(), values.begin() + mid, values.end());
  return values[mid];
}

// Every `step`-th pixel of a CV_32F image, optionally only where mask != 0.
std::vector<float> Sample(const cv::Mat& image, int step, const cv::Mat& mask = {}) {
  std::vector<float> out;
  for (int r = 0; r < image.rows; r += step) {
    const float* row = image.ptr<float>(r);
    const uint8_t* m = mask.empty() ? nullptr : mask.ptr<uint8_t>(r);
    for (int c = 0; c < image.cols; c += step) {
      if (!m || m[c]) out.push_back(row[c]);
    }
  }
  return out;
}

// Open and blocked levels of the marker-free background by Otsu's threshold.
void FieldLevels(WorkingImages* work) {
  double lo = 0.0, hi = 0.0;
  cv::minMaxLoc(work->background, &lo, &hi);
  if (hi <= lo) return;
  cv::Mat scaled;
  work->background.convertTo(scaled, CV_8U, 255.0 / (hi - lo), -255.0 * lo / (hi - lo));
  cv::Mat open_mask;
  cv::threshold(scaled, open_mask, 0, 255, cv::THRESH_BINARY | cv::THRESH_OTSU);
  cv::Mat blocked_mask = 255 - open_mask;
  int step = std::max(1, std::min(work->background.rows, work->background.cols) / 400);
  work->open_level = Median(Sample(work->background, step, open_mask));
  work->blocked_level = Median(Sample(work->background, step, blocked_mask));
  work->field_contrast = work->open_level - work->blocked_level;
}

void NoiseOfDepth(WorkingImages* work) {
  int step = std::max(1, std::min(work->depth.rows, work->depth.cols) / 400);
  std::vector<float> d = Sample(work->depth, step);
  double median = Median(d);
  for (float& v : d) v = std::fabs(v - static_cast<float>(median));
  work->depth_floor = median;
  work->depth_noise = 1.4826 * Median(d);
}

QcMarker Describe(const WorkingImages& work, const cv::Mat& labels, int label,
                  const cv::Rect& box, std::array<double, 2> spacing_mm) {
  // Weights: depth above the noise floor, over the component and a one-pixel ring so that
  // partly covered border pixels count in proportion.
  cv::Rect grown = (box + cv::Size(2, 2) - cv::Point(1, 1)) & cv::Rect(0, 0, labels.cols, labels.rows);
  cv::Mat mask = (labels(grown) == label);
  cv::Mat ring;
  cv::dilate(mask, ring, cv::Mat::ones(3, 3, CV_8U));
  double sw = 0.0, sx = 0.0, sy = 0.0, depth_sum = 0.0;
  int count = 0;
  std::vector<cv::Point2f> points;
  for (int r = 0; r < grown.height; ++r) {
    const float* d = work.depth.ptr<float>(grown.y + r) + grown.x;
    for (int c = 0; c < grown.width; ++c) {
      if (!ring.at<uint8_t>(r, c)) continue;
      double w = std::max(0.0, d[c] - work.depth_floor);
      sw += w;
      sx += w * (grown.x + c + 0.5);
      sy += w * (grown.y + r + 0.5);
      if (mask.at<uint8_t>(r, c)) {
        depth_sum += d[c];
        ++count;
        points.emplace_back(static_cast<float>(grown.x + c + 0.5), static_cast<float>(grown.y + r + 0.5));
      }
    }
  }
  QcMarker m;
  m.centre_px = {sx / std::max(sw, 1e-12), sy / std::max(sw, 1e-12)};
  m.area_mm2 = count * spacing_mm[0] * spacing_mm[1];
  m.attenuation = count > 0 ? depth_sum / count : 0.0;
  // Principal axes in mm: the extents along and across the main direction.
  cv::RotatedRect rect = cv::minAreaRect(points);
  double w_mm = rect.size.width * spacing_mm[1], h_mm = rect.size.height * spacing_mm[0];
  m.length_mm = std::max(w_mm, h_mm) + std::min(spacing_mm[0], spacing_mm[1]);
  m.width_mm = std::min(w_mm, h_mm) + std::min(spacing_mm[0], spacing_mm[1]);
  m.elongated = m.length_mm > 5.0 * m.width_mm && m.width_mm < 6.0;
  std::vector<cv::Point2f> hull;
  cv::convexHull(points, hull);
  for (const cv::Point2f& p : hull) m.outline_px.push_back({p.x, p.y});
  return m;
}

// The shorter side of the bounding box of the largest bright region (Otsu on a reduced
// copy): markers are small holes in it and do not change its box.
double ShorterFieldSideMm(const cv::Mat& log_smooth, double pixel_mm) {
  double scale = std::min(1.0, 400.0 / std::max(log_smooth.rows, log_smooth.cols));
  cv::Mat small, scaled, bright;
  cv::resize(log_smooth, small, cv::Size(), scale, scale, cv::INTER_AREA);
  double lo = 0.0, hi = 0.0;
  cv::minMaxLoc(small, &lo, &hi);
  if (hi <= lo) return 0.0;
  small.convertTo(scaled, CV_8U, 255.0 / (hi - lo), -255.0 * lo / (hi - lo));
  cv::threshold(scaled, bright, 0, 255, cv::THRESH_BINARY | cv::THRESH_OTSU);
  cv::Mat labels, stats, centroids;
  int n = cv::connectedComponentsWithStats(bright, labels, stats, centroids, 8, CV_32S);
  int best = 0;
  for (int i = 1; i < n; ++i) {
    if (best == 0 || stats.at<int>(i, cv::CC_STAT_AREA) > stats.at<int>(best, cv::CC_STAT_AREA)) best = i;
  }
  if (best == 0) return 0.0;
  int side = std::min(stats.at<int>(best, cv::CC_STAT_WIDTH), stats.at<int>(best, cv::CC_STAT_HEIGHT));
  return side / scale * pixel_mm;
}

}  // namespace

WorkingImages MakeWorkingImages(const Image& image, bool linear, std::array<double, 2> spacing_mm,
                                const QcMarkerOptions& options) {
  WorkingImages work;
  work.native = cv::Mat(image.height(), image.width(), CV_32F,
                        const_cast<float*>(image.data())).clone();
  cv::Mat log_domain;
  if (linear) {
    cv::max(work.native, 1.0, log_domain);
    cv::log(log_domain, log_domain);
  } else {
    log_domain = work.native.clone();
  }
  cv::GaussianBlur(log_domain, work.log_smooth, cv::Size(0, 0), 1.0);
  double pixel = std::min(spacing_mm[0], spacing_mm[1]);
  // A marker lying along a blade edge joins the dark region beyond it, and the closing keeps
  // it unless the window is longer than the marker: scale the window with the field.
  double window_mm = std::max(options.background_window_mm,
                              options.window_field_fraction * ShorterFieldSideMm(work.log_smooth, pixel));
  window_mm = std::min(window_mm, options.max_background_window_mm);
  int window = static_cast<int>(std::lround(window_mm / pixel)) | 1;
  window = std::max(3, std::min(window, 2 * std::max(image.width(), image.height()) + 1));
  cv::Mat kernel = cv::getStructuringElement(cv::MORPH_RECT, cv::Size(window, window));
  // Replicated margins let the blocked strip between a blade and the receptor border stay
  // dark even when it is narrower than the window.
  cv::Mat padded, closed;
  cv::copyMakeBorder(work.log_smooth, padded, window, window, window, window, cv::BORDER_REPLICATE);
  cv::morphologyEx(padded, closed, cv::MORPH_CLOSE, kernel);
  work.background = closed(cv::Rect(window, window, image.width(), image.height())).clone();
  work.depth = work.background - work.log_smooth;
  FieldLevels(&work);
  NoiseOfDepth(&work);
  return work;
}

std::vector<QcMarker> FindMarkersIn(const WorkingImages& work, std::array<double, 2> spacing_mm,
                                    const QcMarkerOptions& options) {
  double threshold = std::max(options.relative_threshold * work.field_contrast,
                              work.depth_floor + 8.0 * work.depth_noise);
  cv::Mat mask = work.depth > threshold;
  cv::Mat labels, stats, centroids;
  int n = cv::connectedComponentsWithStats(mask, labels, stats, centroids, 8, CV_32S);
  double pixel_area = spacing_mm[0] * spacing_mm[1];
  std::vector<cv::Rect> boxes(n);
  std::vector<int> areas(n), root(n);
  for (int label = 1; label < n; ++label) {
    boxes[label] = cv::Rect(stats.at<int>(label, cv::CC_STAT_LEFT), stats.at<int>(label, cv::CC_STAT_TOP),
                            stats.at<int>(label, cv::CC_STAT_WIDTH), stats.at<int>(label, cv::CC_STAT_HEIGHT));
    areas[label] = stats.at<int>(label, cv::CC_STAT_AREA);
    root[label] = label;
  }
  // A disc over a field corner can fall apart into a large piece and slivers (the background
  // estimate keeps part of it): fold a piece lying within a larger one's box into it.
  for (int small = 1; small < n; ++small) {
    int host = 0;
    for (int big = 1; big < n; ++big) {
      if (big == small || areas[big] <= areas[small]) continue;
      cv::Rect overlap = boxes[small] & boxes[big];
      if (overlap.area() >= 0.8 * boxes[small].area() && (host == 0 || areas[big] > areas[host])) host = big;
    }
    if (host != 0) root[small] = host;
  }
  for (int label = 1; label < n; ++label) {
    int r = label;
    while (root[r] != r) r = root[r];
    root[label] = r;
  }
  std::vector<int> merged_area(n, 0);
  std::vector<cv::Rect> merged_box(n);
  for (int label = 1; label < n; ++label) {
    merged_area[root[label]] += areas[label];
    merged_box[root[label]] = merged_box[root[label]].area() == 0 ? boxes[label] : (merged_box[root[label]] | boxes[label]);
  }
  for (int r = 0; r < labels.rows; ++r) {
    int* row = labels.ptr<int>(r);
    for (int c = 0; c < labels.cols; ++c) row[c] = root[row[c]];
  }
  std::vector<QcMarker> markers;
  for (int label = 1; label < n; ++label) {
    if (root[label] != label) continue;
    double area = merged_area[label] * pixel_area;
    if (area < options.min_area_mm2 || area > options.max_area_mm2) continue;
    markers.push_back(Describe(work, labels, label, merged_box[label], spacing_mm));
  }
  return markers;
}

}  // namespace beamtrim::qc_internal

namespace beamtrim {

const char* QcMarkerPlacementName(QcMarkerPlacement placement) {
  switch (placement) {
    case QcMarkerPlacement::kEdge: return "edge";
    case QcMarkerPlacement::kCorner: return "corner";
    case QcMarkerPlacement::kInterior: return "interior";
  }
  return "interior";
}

std::vector<QcMarker> FindQcMarkers(const Image& image, bool linear,
                                    std::array<double, 2> spacing_mm,
                                    const QcMarkerOptions& options) {
  if (image.empty()) return {};
  qc_internal::WorkingImages work = qc_internal::MakeWorkingImages(image, linear, spacing_mm, options);
  return qc_internal::FindMarkersIn(work, spacing_mm, options);
}

}  // namespace beamtrim
