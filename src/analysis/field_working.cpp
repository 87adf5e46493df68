// Working resolution for the coarse field search: block averages of about 2 mm.
#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "analysis/field_internal.h"

namespace beamtrim::field_internal {

Blocks DownsampleBlocks(const Image& image, int factor) {
  const int w = image.width();
  const int h = image.height();
  const int bw = (w + factor - 1) / factor;
  const int bh = (h + factor - 1) / factor;
  Blocks out{cv::Mat1f(bh, bw, 0.0f), cv::Mat1f(bh, bw, std::numeric_limits<float>::max()),
             cv::Mat1f(bh, bw, std::numeric_limits<float>::lowest())};
  // Row sums per block column, accumulated in double so a 3000 px image sums exactly enough.
  std::vector<double> sum(bw);
  for (int by = 0; by < bh; ++by) {
    std::fill(sum.begin(), sum.end(), 0.0);
    float* mn = out.min.ptr<float>(by);
    float* mx = out.max.ptr<float>(by);
    const int y1 = std::min(h, (by + 1) * factor);
    for (int y = by * factor; y < y1; ++y) {
      const float* row = image.row(y);
      for (int bx = 0; bx < bw; ++bx) {
        const int x0 = bx * factor;
        const int x1 = std::min(w, x0 + factor);
        float lo = mn[bx], hi = mx[bx];
        double s = 0.0;
        for (int x = x0; x < x1; ++x) {
          const float v = row[x];
          s += v;
          lo = std::min(lo, v);
          hi = std::max(hi, v);
        }
        sum[bx] += s;
        mn[bx] = lo;
        mx[bx] = hi;
      }
    }
    float* mean = out.mean.ptr<float>(by);
    const int rows = y1 - by * factor;
    for (int bx = 0; bx < bw; ++bx) {
      const int cols = std::min(w, (bx + 1) * factor) - bx * factor;
      mean[bx] = static_cast<float>(sum[bx] / (static_cast<double>(rows) * cols));
    }
  }
  return out;
}

cv::Mat1f DownsampleMeanReference(const Image& image, int factor) {
  const int bw = (image.width() + factor - 1) / factor;
  const int bh = (image.height() + factor - 1) / factor;
  cv::Mat1f out(bh, bw, 0.0f);
  for (int by = 0; by < bh; ++by) {
    for (int bx = 0; bx < bw; ++bx) {
      double s = 0.0;
      int n = 0;
      for (int y = by * factor; y < (by + 1) * factor && y < image.height(); ++y) {
        for (int x = bx * factor; x < (bx + 1) * factor && x < image.width(); ++x) {
          s += image.at(x, y);
          ++n;
        }
      }
      out(by, bx) = static_cast<float>(s / n);
    }
  }
  return out;
}

int WorkingFactor(const Image& image, const FieldContext& context, const FieldOptions& options) {
  const int long_side = std::max(image.width(), image.height());
  double factor = 0.0;
  if (context.spacing_mm && (*context.spacing_mm)[0] > 0.0 && (*context.spacing_mm)[1] > 0.0) {
    const double pitch = std::min((*context.spacing_mm)[0], (*context.spacing_mm)[1]);
    factor = std::max(0.1, options.working_pixel_mm) / pitch;
  } else {
    // Unknown scale: a working image of about 256 pixels on its long side, which is about
    // 2 mm per pixel on a 43 cm receptor.
    factor = long_side / 256.0;
  }
  // Keep enough working pixels for small images (at least about 64 across the long side).
  factor = std::min(factor, long_side / 64.0);
  return std::max(1, static_cast<int>(std::lround(factor)));
}

double Percentile(const cv::Mat1f& values, const cv::Mat1b& mask, double pct) {
  std::vector<float> v;
  v.reserve(values.total());
  for (int y = 0; y < values.rows; ++y) {
    const float* p = values.ptr<float>(y);
    const uchar* m = mask.empty() ? nullptr : mask.ptr<uchar>(y);
    for (int x = 0; x < values.cols; ++x) {
      if (!m || m[x]) v.push_back(p[x]);
    }
  }
  if (v.empty()) return 0.0;
  const size_t k = std::min(v.size() - 1,
                            static_cast<size_t>(std::clamp(pct, 0.0, 100.0) / 100.0 * v.size()));
  std::nth_element(v.begin(), v.begin() + k, v.end());
  return v[k];
}

}  // namespace beamtrim::field_internal
