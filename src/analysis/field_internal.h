// Internal stages of the field detector (docs/method.md, "Field detection"). Each stage is a
// pure function on value types so the tests can drive it alone. Not part of the public API.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <vector>

#include <opencv2/core.hpp>

#include "beamtrim/field.h"
#include "beamtrim/geometry.h"
#include "beamtrim/image.h"

namespace beamtrim::field_internal {

// ---- Working resolution (field_working.cpp) ---------------------------------------------

// Block mean over factor x factor pixels; partial blocks at the right/bottom border average
// the pixels they have. Also the block minimum and maximum (for the constant-mask test).
struct Blocks {
  cv::Mat1f mean;
  cv::Mat1f min;
  cv::Mat1f max;
};
Blocks DownsampleBlocks(const Image& image, int factor);
// Slow, obvious reference of the block mean (tests compare the two).
cv::Mat1f DownsampleMeanReference(const Image& image, int factor);

// Full-resolution pixels per working pixel for the options and the spacing.
int WorkingFactor(const Image& image, const FieldContext& context, const FieldOptions& options);

struct WorkingImage {
  int factor = 1;          // full-resolution pixels per working pixel
  cv::Mat1f value;         // log of the block mean (linear input) or the block mean
  cv::Mat1b valid;         // 0 where blanked (or next to the mask)
  cv::Mat1b blanked;       // the constant mask itself
  double lo = 0.0;         // robust range of valid values (0.1 and 99.9 percentiles)
  double hi = 1.0;
  double log_floor = 0.0;  // smallest linear value before the logarithm (linear input)
  double log_offset = 0.0; // added to linear values before the logarithm (linear input)
  bool linear = false;
};

// A mean of full-resolution pixel values in the working image's value units (the logarithm
// of linear input, as Prepare takes it).
double WorkingValue(const WorkingImage& working, double mean);

// Median of the values (the upper one of the middle pair for an even count); 0 when empty.
double MedianOf(std::vector<double> values);

// Percentile (0..100) of the values where mask != 0 (all values when the mask is empty).
double Percentile(const cv::Mat1f& values, const cv::Mat1b& mask, double pct);

// ---- Blanking (field_checks.cpp) --------------------------------------------------------

struct BlankResult {
  bool blanked = false;
  float value = 0.0f;
  cv::Mat1b mask;  // working resolution, 255 = constant mask connected to the border
};
// Finds an electronically blanked outside: blocks of exactly one constant value, connected to
// the image border, covering a noticeable share of the image, whose boundary is a jump (not
// the gradual approach of a display window clipping a dark plateau). `linear`: pixel values
// proportional to exposure (the jump is then judged against the neighbours alone).
BlankResult FindBlankMask(const Image& image, const Blocks& blocks, int factor, bool linear);

// ---- Rotated frame and side candidates (field_lines.cpp) --------------------------------

// The working image resampled on a grid aligned with a field angle: column i, row j has its
// centre at u = u0 + i + 0.5, v = v0 + j + 0.5, with u = x cos(a) + y sin(a),
// v = -x sin(a) + y cos(a) in working-pixel coordinates (x, y).
struct Frame {
  double angle_deg = 0.0;
  double u0 = 0.0;
  double v0 = 0.0;
  cv::Mat1f value;
  cv::Mat1b valid;
  cv::Mat1f grad;  // gradient magnitude per working pixel
};
Frame MakeFrame(const WorkingImage& working, const cv::Mat1f& grad, double angle_deg);

// Dominant field angles in [-45, 45), best first: a Hough accumulator over angle x offset of
// the gradient, signed by polarity, scored by the strongest line of each orientation and
// polarity. At most `count` local maxima at least 4 degrees apart.
std::vector<double> CandidateAngles(const WorkingImage& working, const cv::Mat1f& gx,
                                    const cv::Mat1f& gy, int count);

// Evidence that a blade edge lies on one boundary of the rotated frame.
struct SideEvidence {
  bool blade = false;      // passes every blade test
  double position = 0.0;   // boundary coordinate in frame pixels (column or row index)
  double score = 0.0;
  double support = 0.0;    // of the positions with an open inside, the share with the step
  double coverage = 0.0;   // share of the whole span with the step
  double step = 0.0;       // inside level - outside level (working value units)
  double outside = 0.0;    // blocked plateau level next to the edge
  double inside = 0.0;     // open level next to the edge
  double bright = 0.0;     // share of the outside strip brighter than half-way
  double bright_far = 0.0; // the same over the whole half-plane beyond the edge
  double texture = 0.0;    // share of the outside strip with structure
  double flatness = 0.0;   // outside level fall-off away from the edge, relative to step
  std::string why_not;     // first failed test
  bool only_bright = false; // fails only the bright-beyond test
  bool lifted = false;      // kept despite it: the rectangle is closed there (field_hypotheses.cpp)
};

// Largest shares of a side's outside strip that may be brighter than half-way up its step,
// or show structure, for a blade (JudgeSide; SideConfidence measures its margins from them).
inline constexpr double kMaxBrightShare = 0.1;
inline constexpr double kMaxTexturedShare = 0.12;
// Smallest step, as a share of the robust value range, that a blade edge may have.
inline constexpr double kMinRelativeStep = 0.08;
// A blocked plateau above this share of the robust range, reached by a step below kSmallStep
// of it, is an anatomy outline when no other side gives the blocked level (DropInconsistent).
inline constexpr double kBrightPlateau = 0.6;
inline constexpr double kSmallStep = 0.3;
// Such a plateau: an anatomy outline with more anatomy beyond (an arm beside the chest, the
// body's edge), not a blade, which removes most of the exposure. `lo`, `range`: the robust
// low end and extent of the working values.
inline bool AnatomyOutlinePlateau(double outside, double step, double lo, double range) {
  return outside > lo + kBrightPlateau * range && step < kSmallStep * range;
}

// Largest fall of the blocked level from the edge to 40 mm beyond it, relative to the step.
// Off-focus radiation through the aperture leaves a halo that slopes away from the edge for
// several centimetres; a soft-tissue outline keeps falling further still.
inline constexpr double kMaxFallOff = 0.6;

// Span of the perpendicular coordinate over which a side is tested: [lo, hi).
struct Span {
  int lo = 0;
  int hi = 0;
};

// Boundary positions with a polarity-consistent step, strongest first (at most `count`).
std::vector<int> SideCandidates(const Frame& frame, Side side, Span span, int count);
// The local maxima of the lightly smoothed step sums e[1..n-1] (e has n + 1 entries), largest
// first, at most `count`: the last stage of SideCandidates, shared with its reference.
std::vector<int> StrongestBoundaries(const std::vector<double>& e, int count);
// The along-edge run over which a boundary shows a clear step (at least half of its strong
// step, gaps of a few pixels bridged): before the perpendicular blades are known, a small
// field's side covers only a short part of the image, and testing it over the whole image
// extent would dilute it below every threshold.
Span StepSpan(const Frame& frame, Side side, int position, Span span);
// `bounded`: the span is set by the perpendicular sides found so far, so the step must run
// along most of it.
SideEvidence EvaluateSide(const Frame& frame, Side side, int position, Span span,
                          double range, double depth_px, bool bounded = false);

// ---- Rectangle hypotheses (field_hypotheses.cpp) ----------------------------------------

struct Rectangle {
  double angle_deg = 0.0;
  std::array<std::optional<SideEvidence>, 4> sides;  // nullopt: beyond the image
  double score = 0.0;
  // The rectangle spanned two exposures separated by a blocked band and was cut down to the
  // larger one (see SplitAtBlockedBand).
  bool split = false;
};
// All blades block the same beam: every blocked plateau lies well below the open level. A side
// whose "outside" is above half-way from the darkest plateau of all sides to the open level
// (the strongest side's, or its own where that is higher) is not a blade (typically an
// edge-enhancement halo or an anatomy edge inside the field). A side whose "inside" is hardly
// above the darkest plateau is no field edge either (an edge between two blocked levels).
// The darkest plateau, not the strongest side's, is the reference: one plateau can be lifted
// by scatter or a display curve, and the strongest side may be a false one whose "blocked"
// level is anatomy. Without any reference side, a blade still removes most of the exposure: a
// "blocked" plateau above kBrightPlateau of the image's robust range (`lo`, `range`) reached
// by a step under kSmallStep of it is an anatomy outline with more anatomy beyond (an arm
// beside the chest, the body's edge), not a blade. Removes such sides from `r`.
void DropInconsistent(Rectangle& r, double lo, double range);
// Best rectangle at one angle by coordinate ascent over the four sides. `lo` and `range`: the
// robust low end and extent of the working values (WorkingImage::lo, hi - lo). When that
// leaves a side open, a second ascent keeps the sides that fail only the bright-beyond test
// provisionally and is taken if all four sides then close on each other (docs/method.md,
// "closed rectangle").
Rectangle BestRectangle(const Frame& frame, double lo, double range, double depth_px);

// Two exposures side by side on one plate (computed radiography) make a rectangle whose
// outer blades belong to different fields, with a blocked band right across it. Such a band
// (at the blocked level over at least 90 % of the field's extent, at least `min_band_px`
// wide) cannot lie inside one exposed field; the rectangle is cut down to the larger part
// and marked split. Returns whether it was.
bool SplitAtBlockedBand(const Frame& frame, double range, double depth_px, double min_band_px,
                        Rectangle* rect);

// Line (full-resolution pixel coordinates) of a side of a frame at a boundary position, with
// the normal pointing out of the field.
Line FrameSideLine(const Frame& frame, Side side, double position, int factor);

// ---- Blades close to the image border (field_border.cpp) --------------------------------

// How far from the image border, in mm, FindBladeNearBorder looks for a blade shadow.
inline constexpr double kBorderSearchMm = 20.0;
// Share of the usable segments whose rise lies on the fitted line.
inline constexpr double kMinBorderSupport = 0.6;
// Largest field rotation, in degrees, for which the border is searched: a blade turned further
// runs away from the border, into the reach of the working-resolution search.
inline constexpr double kMaxBorderFieldAngleDeg = 3.0;
// Largest angle, in degrees, between the found edge and the field's axes.
inline constexpr double kBorderAngleTolDeg = 1.0;

struct BorderSearch {
  Side side = Side::kTop;
  double angle_deg = 0.0;   // field angle (frame angle of the sides found, else 0)
  double along_lo = 0.0;    // along-edge extent to test, full pixels (x for top and bottom,
  double along_hi = 0.0;    // y for left and right): between the perpendicular blades
  double pitch_mm = 0.0;    // detector pixel pitch, 0 when unknown
  double lo = 0.0;          // WorkingImage::lo and hi - lo
  double range = 1.0;
  std::optional<double> blocked;  // darkest blocked plateau of the sides found, if any
};
struct BorderBlade {
  Line line;               // full-resolution pixels, normal out of the field
  SideEvidence evidence;   // levels, step and support, for the confidence and later checks
};
// A blade shadow within kBorderSearchMm of the image border on one side, too close to it for
// the working-resolution search: a dark plateau from the border to one clear rise, in short
// segments along the side, the rises on one straight line parallel to the field axes, the
// plateau as dark as a blocked one. Pixels the working image marks invalid (blanked) are not
// used.
std::optional<BorderBlade> FindBladeNearBorder(const Image& image, const WorkingImage& working,
                                               const BorderSearch& search);

// ---- Sub-pixel refinement (field_refine.cpp) --------------------------------------------

// One profile across an edge: samples at `step` px spacing from the outside (index 0) to the
// inside, in the chosen domain.
struct EdgeCrossing {
  double offset = 0.0;     // position of the edge from the profile centre, px (+ = inward)
  double span_centre = 0.0;  // centre of the 10-90 % span, same convention
  double low = 0.0;        // blocked level
  double high = 0.0;       // open level
  double penumbra = 0.0;   // 10-90 % width, px
  bool ok = false;
};
// Locates the edge on a profile sampled every `step` px, centred at index (n-1)/2: the
// crossing of `fraction` between the local blocked and open levels nearest to the steepest
// rise; for the quarter-maximum definition pass fraction < 0 and `absolute_level`.
EdgeCrossing LocateCrossing(const std::vector<double>& profile, double step, double fraction,
                            std::optional<double> absolute_level = std::nullopt);

// The 50 % exposure point of a processed (display) profile, same convention as
// EdgeCrossing::offset. Display values are taken as a monotone function of exposure, locally
// affine in its logarithm with an unknown gain; the gain chosen is the one that makes the
// transition point-symmetric about its 50 % point, as the symmetric blur of a blade shadow is
// in exposure (docs/method.md, "Sub-pixel refinement"). nullopt when no gain does.
std::optional<double> SymmetricExposureCrossing(const std::vector<double>& profile, double step);
// Slow, obvious reference: the gain scanned in tenths over the whole range.
std::optional<double> SymmetricExposureCrossingReference(const std::vector<double>& profile,
                                                         double step);
// A processed profile's edge point: its symmetric exposure point when one exists within one
// penumbra width (at least 1 px) of the 10-90 % span centre of `e`; nullopt otherwise. Per
// profile, because the lopsidedness depends on the local contrast, which changes along a
// blade (open field at one end, dense anatomy at the other).
std::optional<double> SymmetricExposurePoint(const std::vector<double>& profile, double step,
                                             const EdgeCrossing& e);

// Bilinear sample at continuous coordinates (pixel centres at +0.5); clamps at the border.
double SampleBilinear(const Image& image, double x, double y);

// Robust straight-line fit (Tukey biweight, iteratively reweighted total least squares)
// starting from `start`; returns the fitted line and the inlier share via `inliers`.
Line RobustLineFit(const std::vector<Point2d>& points, const Line& start, double scale_px,
                   double* inlier_share = nullptr);

// Bow of an edge along a side: a quadratic fitted robustly (Tukey's biweight) to the edge's
// offsets from the fitted line, d(u) = a + b u + c u^2 with u = -1 .. 1 from end to end. The
// sagitta is how far the middle lies from the chord through the ends (px, + = towards the
// outside). A blade's shadow is straight; the outline of a round structure is not.
struct EdgeBow {
  double sagitta_px = 0.0;
  double standard_error_px = 0.0;  // of the sagitta, from the residual spread
  double spread_px = 0.0;          // robust spread (1.4826 MAD) of the residuals
  int points = 0;                  // points the fit kept (nonzero weight)
};
// Fits the quadratic to points given as (position along the side, signed offset).
EdgeBow FitBow(const std::vector<Point2d>& along_offset);

struct RefinedSide {
  bool ok = false;
  Line line;                      // normal points out of the field
  double contrast_ratio = 0.0;
  std::optional<double> penumbra_px;
  double inlier_share = 0.0;
  int profiles = 0;
  bool quarter_fallback = false;  // quarter maximum asked but not found on this edge
  // Bow of the edge points about the line fitted through them, before the processed-image
  // shift to each profile's symmetric exposure point (which adds noise of its own).
  EdgeBow bow;
  double level = 0.0;             // midway between the blocked and open levels (medians)
  double window_px = 0.0;         // half-width of the last profiles
};
// Refines a coarse side line at full resolution along the segment [a, b] of the line.
RefinedSide RefineSide(const Image& image, const Line& coarse, Point2d a, Point2d b,
                       double search_px, bool linear, EdgeDefinition definition,
                       const cv::Mat1b* valid, int factor);

// Bow of the same edge traced another way: on each profile across [a, b] (half-width `half`,
// wide enough for the middle of an arc), the crossing of one `level` for the whole side
// nearest to the line. Independent of the per-profile levels RefineSide's points use.
EdgeBow TraceEdgeBow(const Image& image, const Line& line, Point2d a, Point2d b, double half,
                     double level, const cv::Mat1b* valid, int factor);

// An edge that follows an arc rather than a straight blade shadow: both tracings bow the same
// way, by at least `min_sagitta_px` and by at least kArcCleanness times their residual
// spread, and agree on the sagitta within a factor kArcAgreement. Shadows of true blades on
// processed images can bow one tracing (the display's local levels move along the edge) but
// then the two disagree or the bow is ragged (docs/method.md, "Arcs are no blades"). The
// caller's minimum is the larger of kArcMinSagittaMm and kArcMinBowShare of the side's
// length: an arc of radius R bows by L / (8 R) of its chord L, so a round outline that a side
// follows over a quarter of its radius or more bows by at least 3 %, while the small bends of
// long blade shadows (anatomy, a mask beside them) stay well under it.
constexpr double kArcMinSagittaMm = 1.0;
constexpr double kArcMinBowShare = 0.03;
constexpr double kArcCleanness = 3.0;
constexpr double kArcAgreement = 1.5;
// Confidence of a side that follows an arc beside true blades (at most).
constexpr double kArcSideConfidence = 0.5;
// One tracing's half of that test: at least five points, a sagitta of at least
// `min_sagitta_px` and of at least kArcCleanness times the residual spread.
bool BowsCleanly(const EdgeBow& bow, double min_sagitta_px);
bool FollowsAnArc(const EdgeBow& points, const EdgeBow& traced, double min_sagitta_px);

// ---- Polygon and checks (field_checks.cpp) ----------------------------------------------

// Clips `polygon` to the half-plane where line.SignedDistance(p) <= 0.
Polygon ClipHalfPlane(const Polygon& polygon, const Line& line);

// A second bright, roughly rectangular exposed region outside the main field, separated from
// it by a blocked band. `field_w` is the field in working-pixel coordinates.
bool FindSecondExposure(const WorkingImage& working, const Polygon& field_w, double blocked,
                        double open, std::string* note);

}  // namespace beamtrim::field_internal
