// Image: a single-channel float raster, row-major, owning its pixels.
// Convention for radiographs (see docs/method.md): larger value = more radiation reached the
// detector, whatever the photometric interpretation. Copies are deliberate (Clone()); moves are
// cheap. Not synchronised: share read-only across threads, never write concurrently.
#pragma once

#include <cassert>
#include <cstddef>
#include <vector>

namespace beamtrim {

class Image {
 public:
  Image() = default;
  Image(int width, int height, float fill = 0.0f)
      : width_(width), height_(height),
        pixels_(static_cast<size_t>(width) * static_cast<size_t>(height), fill) {}

  Image(Image&&) noexcept = default;
  Image& operator=(Image&&) noexcept = default;
  Image(const Image&) = delete;
  Image& operator=(const Image&) = delete;

  Image Clone() const {
    Image copy;
    copy.width_ = width_;
    copy.height_ = height_;
    copy.pixels_ = pixels_;
    return copy;
  }

  int width() const { return width_; }
  int height() const { return height_; }
  bool empty() const { return pixels_.empty(); }
  size_t size() const { return pixels_.size(); }

  float& at(int x, int y) {
    assert(x >= 0 && y >= 0 && x < width_ && y < height_);
    return pixels_[static_cast<size_t>(y) * width_ + x];
  }
  float at(int x, int y) const {
    assert(x >= 0 && y >= 0 && x < width_ && y < height_);
    return pixels_[static_cast<size_t>(y) * width_ + x];
  }
  float* row(int y) { return pixels_.data() + static_cast<size_t>(y) * width_; }
  const float* row(int y) const { return pixels_.data() + static_cast<size_t>(y) * width_; }
  float* data() { return pixels_.data(); }
  const float* data() const { return pixels_.data(); }

 private:
  int width_ = 0;
  int height_ = 0;
  std::vector<float> pixels_;
};

}  // namespace beamtrim
