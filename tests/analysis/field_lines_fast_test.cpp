// The fast side kernels of the field detector against their slow, obvious references
// (field_lines_reference.h): identical results, not merely close, because the detector's
// decisions compare these values with thresholds. Frames are synthetic: a bright rectangle on
// a blocked background with noise, holes in the valid mask and rotated frame borders.
#include <doctest/doctest.h>

#include <cmath>
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
