// The fast side kernels of the field detector against their slow, obvious references
// (field_lines_reference.h): identical results, not merely close, because the detector's
// decisions compare these values with thresholds. Frames are synthetic: a bright rectangle on
// a blocked background with noise, holes in the valid mask and rotated frame borders.
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <random>
#include <string>
#include <vector>

#include <opencv2/imgproc.hpp>

#include "analysis/field_internal.h"
#include "analysis/field_lines_reference.h"
#include "analysis/field_test_images.h"

using namespace beamtrim;
using namespace beamtrim::field_internal;

namespace {

// Synthetic ground truth: open level 3 inside [x0, x1) x [y0, y1), blocked level 1 outside,
// a bright stripe beyond the right blade (a second exposure), Gaussian noise, and blanked
// (invalid) blocks.
WorkingImage SyntheticWorking(int w, int h, unsigned seed) {
  std::mt19937 rng(seed);
  std::normal_distribution<float> noise(0.0f, 0.08f);
  WorkingImage wk;
  wk.value = cv::Mat1f(h, w);
  wk.valid = cv::Mat1b(h, w, uchar(255));
  const int x0 = w / 5, x1 = w - w / 4, y0 = h / 6, y1 = h - h / 5;
  for (int y = 0; y < h; ++y) {
    for (int x = 0; x < w; ++x) {
      float v = (x >= x0 && x < x1 && y >= y0 && y < y1) ? 3.0f : 1.0f;
      if (x >= x1 + 6 && x < x1 + 9) v = 2.5f;
      if (x > x0 + 10 && x < x0 + 14 && y > h / 2) v = 1.2f;  // an object inside the field
      wk.value(y, x) = v + noise(rng);
    }
  }
  std::uniform_int_distribution<int> px(0, w - 4), py(0, h - 4);
  for (int i = 0; i < 6; ++i) wk.valid(cv::Rect(px(rng), py(rng), 3, 3)).setTo(0);
  wk.lo = 1.0;
  wk.hi = 3.0;
  return wk;
}

void CheckSame(const SideEvidence& fast, const SideEvidence& slow) {
  CHECK(fast.blade == slow.blade);
  CHECK(fast.position == slow.position);
  CHECK(fast.score == slow.score);
  CHECK(fast.support == slow.support);
  CHECK(fast.coverage == slow.coverage);
  CHECK(fast.step == slow.step);
  CHECK(fast.outside == slow.outside);
  CHECK(fast.inside == slow.inside);
  CHECK(fast.bright == slow.bright);
  CHECK(fast.bright_far == slow.bright_far);
  CHECK(fast.texture == slow.texture);
  CHECK(fast.flatness == slow.flatness);
  CHECK(fast.why_not == slow.why_not);
}

}  // namespace

TEST_CASE("FastSideCandidatesEqualTheReferenceOnEverySideAndSpan") {
  // Reference: SideCandidatesReference, the per-pixel loop (project rule: fast vs slow).
  for (unsigned seed : {1u, 2u}) {
    WorkingImage wk = SyntheticWorking(61, 47, seed);
    cv::Mat1f grad = testimg::GradientMagnitude(wk.value);
    for (double angle : {0.0, 6.5, -31.0}) {
      Frame f = MakeFrame(wk, grad, angle);
      for (Side side : kAllSides) {
        const int along =
            (side == Side::kLeft || side == Side::kRight) ? f.value.rows : f.value.cols;
        for (Span span : {Span{0, along}, Span{5, along / 2}, Span{-3, along + 4}, Span{9, 4}}) {
          CAPTURE(seed);
          CAPTURE(angle);
          CAPTURE(static_cast<int>(side));
          CHECK(SideCandidates(f, side, span, 6) == SideCandidatesReference(f, side, span, 6));
        }
      }
    }
  }
}

TEST_CASE("FastEvaluateSideEqualsTheReferenceAtEveryPosition") {
  // Reference: EvaluateSideReference; every boundary position of every side, including the
  // frame borders and positions beyond them, with short and long depths.
  int blades = 0, evaluated = 0;
  for (unsigned seed : {3u, 4u}) {
    WorkingImage wk = SyntheticWorking(57, 44, seed);
    cv::Mat1f grad = testimg::GradientMagnitude(wk.value);
    for (double angle : {0.0, -12.0, 40.0}) {
      Frame f = MakeFrame(wk, grad, angle);
      for (Side side : kAllSides) {
        const bool vertical = side == Side::kLeft || side == Side::kRight;
        const int along = vertical ? f.value.rows : f.value.cols;
        const int across = vertical ? f.value.cols : f.value.rows;
        for (int p = -1; p <= across + 1; ++p) {
          for (Span span : {Span{0, along}, Span{along / 4, along / 2}}) {
            for (double depth : {5.0, 20.0}) {
              for (bool bounded : {false, true}) {
                CAPTURE(seed);
                CAPTURE(angle);
                CAPTURE(static_cast<int>(side));
                CAPTURE(p);
                SideEvidence fast = EvaluateSide(f, side, p, span, 2.0, depth, bounded);
                SideEvidence slow = EvaluateSideReference(f, side, p, span, 2.0, depth, bounded);
                CheckSame(fast, slow);
                blades += slow.blade ? 1 : 0;
                ++evaluated;
              }
            }
          }
        }
      }
    }
  }
  // The frames must exercise the whole decision, not only its early exits.
  CHECK(blades > 0);
  CHECK(blades < evaluated);
}

TEST_CASE("FastStepSpanEqualsTheReferenceAtEveryPosition") {
  // Reference: StepSpanReference, strips through SideView and a run search written as "from
  // every qualifying start, extend while the next qualifying step is at most 4 away".
  int narrowed = 0, tested = 0;
  for (unsigned seed : {5u, 6u}) {
    WorkingImage wk = SyntheticWorking(53, 41, seed);
    cv::Mat1f grad = testimg::GradientMagnitude(wk.value);
    for (double angle : {0.0, 17.0, -44.5}) {
      Frame f = MakeFrame(wk, grad, angle);
      for (Side side : kAllSides) {
        const bool vertical = side == Side::kLeft || side == Side::kRight;
        const int along = vertical ? f.value.rows : f.value.cols;
        const int across = vertical ? f.value.cols : f.value.rows;
        for (int p = -1; p <= across + 1; ++p) {
          for (Span span : {Span{0, along}, Span{along / 3, along}, Span{-2, along + 3}}) {
            CAPTURE(seed);
            CAPTURE(angle);
            CAPTURE(static_cast<int>(side));
            CAPTURE(p);
            const Span fast = StepSpan(f, side, p, span);
            const Span slow = StepSpanReference(f, side, p, span);
            CHECK(fast.lo == slow.lo);
            CHECK(fast.hi == slow.hi);
            narrowed += (slow.lo != span.lo || slow.hi != span.hi) ? 1 : 0;
            ++tested;
          }
        }
      }
    }
  }
  // Both outcomes must occur: runs found and spans returned unchanged.
  CHECK(narrowed > 0);
  CHECK(narrowed < tested);
}

TEST_CASE("FastCandidateAnglesEqualTheReferenceOnRotatedFields") {
  // Reference: CandidateAnglesReference (fresh accumulator, cos/sin and fmod per vote, maxima
  // taken one by one). Synthetic ground truth: the field of SyntheticWorking rotated by a
  // known angle about the image centre.
  for (unsigned seed : {7u, 8u}) {
    const WorkingImage base = SyntheticWorking(72, 58, seed);
    for (double angle : {0.0, 7.3, -23.0, 38.5}) {
      WorkingImage wk = base;
      const cv::Mat rot = cv::getRotationMatrix2D(cv::Point2f(36.0f, 29.0f), angle, 1.0);
      cv::warpAffine(base.value, wk.value, rot, base.value.size(), cv::INTER_LINEAR,
                     cv::BORDER_REPLICATE);
      cv::Mat1f smooth, gx, gy;
      cv::GaussianBlur(wk.value, smooth, cv::Size(0, 0), 0.8);
      cv::Sobel(smooth, gx, CV_32F, 1, 0, 3, 1.0 / 8.0);
      cv::Sobel(smooth, gy, CV_32F, 0, 1, 3, 1.0 / 8.0);
      CAPTURE(seed);
      CAPTURE(angle);
      const std::vector<double> fast = CandidateAngles(wk, gx, gy, 4);
      const std::vector<double> slow = CandidateAnglesReference(wk, gx, gy, 4);
      CHECK(fast == slow);
      REQUIRE(!slow.empty());
      // For small rotations the strongest orientation is the field's (OpenCV rotates
      // counter-clockwise on screen, the frame angle is clockwise): within 1.5 degrees. At
      // large rotations this small image is dominated by the replicated borders, so only the
      // equality above is checked there.
      if (std::fabs(angle) < 10.0) CHECK(std::fabs(slow[0] + angle) <= 1.5);
    }
  }
}

TEST_CASE("NthFloatIsTheValueStdNthElementLeavesAtK") {
  // Reference: std::nth_element on a copy of the same vector (C++ standard, [alg.nth.element]:
  // the element at k is the one that would be there if the range were sorted). Compared bit
  // for bit, on plateau-like, duplicated, signed-zero, infinite and NaN values.
  std::mt19937 rng(11);
  std::normal_distribution<float> noise(0.0f, 1.0f);
  std::uniform_int_distribution<int> small(-3, 3);
  int compared = 0, radix_sized = 0;
  for (int size : {1, 2, 7, 255, 256, 257, 600, 1000, 4200, 9000}) {
    for (int kind = 0; kind < 6; ++kind) {
      std::vector<float> v(size);
      for (float& x : v) {
        switch (kind) {
          case 0: x = noise(rng); break;                          // spread
          case 1: x = 2.3f + 0.01f * noise(rng); break;           // a blocked plateau
          case 2: x = static_cast<float>(small(rng)); break;      // many equal values
          case 3: x = small(rng) == 0 ? -0.0f : (small(rng) > 0 ? 0.0f : 1.5f); break;
          case 4: x = small(rng) == 3 ? std::numeric_limits<float>::infinity() : -1e30f * noise(rng); break;
          default: x = small(rng) == 3 ? std::numeric_limits<float>::quiet_NaN() : noise(rng); break;
        }
      }
      std::uniform_int_distribution<int> any(0, size - 1);
      for (size_t k : {size_t{0}, static_cast<size_t>(size / 2), static_cast<size_t>(size - 1),
                       static_cast<size_t>(any(rng))}) {
        std::vector<float> a = v, b = v;
        std::nth_element(b.begin(), b.begin() + k, b.end());
        const float fast = NthFloat(a, k), slow = b[k];
        uint32_t fb, sb;
        std::memcpy(&fb, &fast, 4);
        std::memcpy(&sb, &slow, 4);
        CAPTURE(size);
        CAPTURE(kind);
        CAPTURE(k);
        CHECK(fb == sb);
        ++compared;
        radix_sized += size >= 256 ? 1 : 0;
      }
    }
  }
  CHECK(radix_sized > compared / 2);
}

TEST_CASE("BlockSumsMinimaAndMaximaAreBitForBitThoseOfTheObviousLoop") {
  // Reference: the obvious loop over each block, row by row: a row's pixels summed in order
  // from 0.0 and added to the block's sum; minimum and maximum taken pixel by pixel in the
  // same order with std::min / std::max (common practice, no single source; the order is
  // part of the definition because NaN and signed zeros make min and max order-dependent).
  std::mt19937 rng(21);
  std::uniform_real_distribution<float> u(-50.0f, 1000.0f);
  std::uniform_int_distribution<int> pick(0, 99);
  for (int factor : {1, 2, 3, 4, 5, 13}) {
    for (auto [w, h] : {std::pair{103, 77}, std::pair{64, 40}, std::pair{2, 9}}) {
      Image img(w, h);
      for (int y = 0; y < h; ++y) {
        for (int x = 0; x < w; ++x) {
          const int r = pick(rng);
          img.at(x, y) = r == 0   ? std::numeric_limits<float>::quiet_NaN()
                         : r == 1 ? -0.0f
                         : r == 2 ? 0.0f
                                  : u(rng);
        }
      }
      const Blocks fast = DownsampleBlocks(img, factor);
      const int bw = (w + factor - 1) / factor, bh = (h + factor - 1) / factor;
      REQUIRE(fast.mean.cols == bw);
      REQUIRE(fast.mean.rows == bh);
      int differ = 0;
      for (int by = 0; by < bh; ++by) {
        for (int bx = 0; bx < bw; ++bx) {
          double sum = 0.0;
          float lo = std::numeric_limits<float>::max(), hi = std::numeric_limits<float>::lowest();
          int rows = 0, cols = 0;
          for (int y = by * factor; y < std::min(h, (by + 1) * factor); ++y, ++rows) {
            double s = 0.0;
            cols = 0;
            for (int x = bx * factor; x < std::min(w, (bx + 1) * factor); ++x, ++cols) {
              s += img.at(x, y);
              lo = std::min(lo, img.at(x, y));
              hi = std::max(hi, img.at(x, y));
            }
            sum += s;
          }
          const float mean = static_cast<float>(sum / (static_cast<double>(rows) * cols));
          auto bits = [](float v) { uint32_t b; std::memcpy(&b, &v, 4); return b; };
          differ += bits(fast.mean(by, bx)) != bits(mean);
          differ += bits(fast.min(by, bx)) != bits(lo);
          differ += bits(fast.max(by, bx)) != bits(hi);
        }
      }
      CAPTURE(factor);
      CAPTURE(w);
      CHECK(differ == 0);
    }
  }
}

TEST_CASE("FmodNinetyAndRoundHalfAwayEqualTheLibraryCalls") {
  // Reference: std::fmod and std::lround (C standard library, 7.12.10.1 and 7.12.9.7:
  // fmod is exact; lround rounds halfway cases away from zero), compared with ==.
  std::mt19937 rng(31);
  std::uniform_real_distribution<double> angle(-45.0, 45.0);
  int compared = 0;
  for (int i = 0; i < 200000; ++i) {
    const double psi = angle(rng), a = -45.0 + 0.5 * (i % 180);
    const double x = psi - a + 405.0;
    CHECK(FmodNinety(x) == std::fmod(x, 90.0));
    ++compared;
  }
  // Exactly on the multiples of 90, just beside them, and outside the voting loop's range.
  for (double base : {270.0, 360.0, 450.0, 540.0, 0.0, -90.0, 1e6}) {
    for (double x : {base, std::nextafter(base, 0.0), std::nextafter(base, 1e9)}) {
      CHECK(FmodNinety(x) == std::fmod(x, 90.0));
      ++compared;
    }
  }
  for (int i = 0; i < 200000; ++i) {
    const double x = angle(rng) * 20.0;
    CHECK(RoundHalfAway(x) == std::lround(x));
  }
  for (double h = -6.5; h <= 6.5; h += 0.5) {
    for (double x : {h, std::nextafter(h, -100.0), std::nextafter(h, 100.0)}) {
      CHECK(RoundHalfAway(x) == std::lround(x));
      ++compared;
    }
  }
  for (double x : {0.49999999999999994, -0.49999999999999994, 4503599627370495.5, 9.1e15, -9.1e15}) {
    CHECK(RoundHalfAway(x) == std::lround(x));
  }
  CHECK(compared > 200000);
}
