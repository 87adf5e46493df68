// Working resolution for the coarse field search: block averages of about 2 mm.
#include <algorithm>
#include <cmath>
#include <limits>
#include <vector>

#include "analysis/field_internal.h"
#include "analysis/field_lines_reference.h"

namespace beamtrim::field_internal {

namespace {

// One image row into the running block sums, minima and maxima of the whole blocks
// [0, full): pixel column i of every block at a time, so that each block's sum, minimum and
// maximum take its pixels in the same order as a loop over the block's own columns would
// (every value bit for bit the same), while the loop over the blocks runs without a short
// inner loop per block. F > 0: the factor as a compile-time constant.
template <int F>
void AddWholeBlocks(const float* row, int factor, int full, double* s, float* mn, float* mx) {
  const int f = F > 0 ? F : factor;
  std::fill(s, s + full, 0.0);
  for (int i = 0; i < f; ++i) {
    const float* r = row + i;
    for (int bx = 0; bx < full; ++bx) {
      const float v = r[static_cast<ptrdiff_t>(bx) * f];
      s[bx] += v;
      mn[bx] = std::min(mn[bx], v);
      mx[bx] = std::max(mx[bx], v);
    }
  }
}

}  // namespace

Blocks DownsampleBlocks(const Image& image, int factor) {
  const int w = image.width();
  const int h = image.height();
  const int bw = (w + factor - 1) / factor;
  const int bh = (h + factor - 1) / factor;
  const int full = w / factor;  // blocks with all `factor` columns
  Blocks out{cv::Mat1f(bh, bw, 0.0f), cv::Mat1f(bh, bw, std::numeric_limits<float>::max()),
             cv::Mat1f(bh, bw, std::numeric_limits<float>::lowest())};
  // Row sums per block column, accumulated in double so a 3000 px image sums exactly enough:
  // for each row, the block's pixels in order from 0.0 (`row_sum`), then added to `sum`.
  std::vector<double> sum(bw), row_sum(bw);
  for (int by = 0; by < bh; ++by) {
    std::fill(sum.begin(), sum.end(), 0.0);
    float* mn = out.min.ptr<float>(by);
    float* mx = out.max.ptr<float>(by);
    const int y1 = std::min(h, (by + 1) * factor);
    for (int y = by * factor; y < y1; ++y) {
      const float* row = image.row(y);
      switch (factor) {
        case 2: AddWholeBlocks<2>(row, factor, full, row_sum.data(), mn, mx); break;
        case 4: AddWholeBlocks<4>(row, factor, full, row_sum.data(), mn, mx); break;
        default: AddWholeBlocks<0>(row, factor, full, row_sum.data(), mn, mx); break;
      }
      for (int bx = 0; bx < full; ++bx) sum[bx] += row_sum[bx];
      for (int bx = full; bx < bw; ++bx) {  // the partial block at the right border
        const int x0 = bx * factor;
        const int x1 = std::min(w, x0 + factor);
        float lo = mn[bx], hi = mx[bx];
        double rs = 0.0;
        for (int x = x0; x < x1; ++x) {
          const float v = row[x];
          rs += v;
          lo = std::min(lo, v);
          hi = std::max(hi, v);
        }
        sum[bx] += rs;
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

double MedianOf(std::vector<double> values) {
  if (values.empty()) return 0.0;
  auto mid = values.begin() + values.size() / 2;
  std::nth_element(values.begin(), mid, values.end());
  return *mid;
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
  return NthFloat(v, k);  // the value std::nth_element leaves at k, bit for bit
}

}  // namespace beamtrim::field_internal
