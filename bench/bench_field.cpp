// Accuracy and speed of the field detector on synthetic radiographs with exact truth, side by
// side with a plain baseline (Otsu threshold, largest contour, minimum-area rectangle).
// Not a test: prints a table (docs/validation.md, "Field detection").
//   bench_field [--count N] [--full K] [--seed S] [--full-mm P] [--dump DIR] [--only CLASS]
//               [--perturb quantize8|jpeg|blur|noise|gamma]
// --perturb changes every image after generation in a way the generator itself never does (an
// 8-bit export, a softer detector, more noise, another display curve), to see how much of the
// accuracy survives images the detector was not developed on.
// Every situation class is drawn in turn with fixed seeds; one core (OpenCV threads off).
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include <opencv2/core.hpp>
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

#include "beamtrim/field.h"
#include "beamtrim/geometry.h"
#include "beamtrim/synth.h"

using namespace beamtrim;

namespace {

struct Row {
  std::string situation;
  double hausdorff_mm = 0.0;
  double baseline_mm = 0.0;
  int sides_right = 0;
  bool open_right = true, blanked_right = true, cropped_right = true, double_right = true;
  double ms = 0.0;
  bool full = false;
  bool linear = false;
  // Signed distance (mm) of each side found in both, at the middle of the true side: positive
  // when the found edge lies outside the true field. Sides with a gross error are left out, so
  // the figures show the bias of the refinement rather than wrong blades.
  std::vector<double> side_offsets_mm;
};

double Pct(std::vector<double> v, double p) {
  if (v.empty()) return std::nan("");
  std::sort(v.begin(), v.end());
  const size_t k = std::min(v.size() - 1, static_cast<size_t>(p / 100.0 * (v.size() - 1) + 0.5));
  return v[k];
}

// The recipe most people would write first.
Polygon Baseline(const Image& image, bool linear) {
  cv::Mat1f src(image.height(), image.width(), const_cast<float*>(image.data()));
  cv::Mat1f v = src.clone();
  if (linear) {
    cv::max(v, 1e-3f, v);
    cv::log(v, v);
  }
  cv::Mat u8;
  cv::normalize(v, u8, 0, 255, cv::NORM_MINMAX, CV_8U);
  cv::Mat1b bin;
  cv::threshold(u8, bin, 0, 255, cv::THRESH_BINARY | cv::THRESH_OTSU);
  std::vector<std::vector<cv::Point>> contours;
  cv::findContours(bin, contours, cv::RETR_EXTERNAL, cv::CHAIN_APPROX_SIMPLE);
  if (contours.empty()) return RectPolygon(0, 0, image.width(), image.height());
  size_t best = 0;
  for (size_t i = 1; i < contours.size(); ++i) {
    if (cv::contourArea(contours[i]) > cv::contourArea(contours[best])) best = i;
  }
  cv::Point2f pts[4];
  cv::minAreaRect(contours[best]).points(pts);
  Polygon p;
  for (const auto& q : pts) p.push_back({q.x, q.y});
  MakeClockwise(p);
  p = ClipToRect(p, image.width(), image.height());
  MakeClockwise(p);
  return p;
}

std::vector<double> SideOffsetsMm(const FieldMeasurement& found, const FieldMeasurement& truth,
                                  double pixel_mm) {
  Point2d centre{0, 0};
  for (const Point2d& q : truth.polygon_px) {
    centre.x += q.x / truth.polygon_px.size();
    centre.y += q.y / truth.polygon_px.size();
  }
  std::vector<double> out;
  for (int k = 0; k < 4; ++k) {
    const auto& fl = found.sides[k].line_px;
    const auto& tl = truth.sides[k].line_px;
    if (!found.sides[k].visible || !truth.sides[k].visible || !fl || !tl) continue;
    const Point2d mid{(tl->a.x + tl->b.x) / 2, (tl->a.y + tl->b.y) / 2};
    Line f = LineThrough(fl->a, fl->b);
    if (f.SignedDistance(centre) > 0) f = Line{-f.nx, -f.ny, -f.c};
    // The found line's distance from the true side's middle, along the found normal: negative
    // of the middle's signed distance from the found line.
    const double d = -f.SignedDistance(mid) * pixel_mm;
    if (std::fabs(d) < 5.0) out.push_back(d);
  }
  return out;
}

// Deterministic per image (seeded by its index), so runs compare image by image.
void Perturb(const std::string& kind, int index, Image* image) {
  cv::Mat1f v(image->height(), image->width(), image->data());
  if (kind == "quantize8") {
    // An 8-bit export windowed on the 0.5-99.5 percentiles: the blocked plateau and the
    // brightest open field clip, and the levels between become coarse steps.
    std::vector<float> all(v.begin(), v.end());
    std::sort(all.begin(), all.end());
    const float lo = all[all.size() / 200], hi = all[all.size() - 1 - all.size() / 200];
    const float scale = hi > lo ? 255.0f / (hi - lo) : 1.0f;
    for (float& x : v) x = lo + std::round(std::clamp((x - lo) * scale, 0.0f, 255.0f)) / scale;
  } else if (kind == "jpeg") {
    // An 8-bit export over the image's whole range (masks keep their value), then baseline
    // JPEG at quality 90 (lossy compression of images shared outside the archive): ringing
    // beside every sharp edge, masks included.
    double lo, hi;
    cv::minMaxLoc(v, &lo, &hi);
    const double scale = hi > lo ? 255.0 / (hi - lo) : 1.0;
    cv::Mat1b eight;
    v.convertTo(eight, CV_8U, scale, -lo * scale);
    std::vector<uchar> bytes;
    cv::imencode(".jpg", eight, bytes, {cv::IMWRITE_JPEG_QUALITY, 90});
    cv::Mat1b back = cv::imdecode(bytes, cv::IMREAD_GRAYSCALE);
    back.convertTo(v, CV_32F, 1.0 / scale, lo);
  } else if (kind == "blur") {
    cv::GaussianBlur(v, v, cv::Size(0, 0), 1.5);  // symmetric: the 50 % points stay put
  } else if (kind == "noise") {
    // Added noise of a tenth of the median level, independent of the signal.
    std::vector<float> all(v.begin(), v.end());
    std::nth_element(all.begin(), all.begin() + all.size() / 2, all.end());
    cv::Mat1f n(v.size());
    cv::RNG rng(static_cast<uint64_t>(index) * 7919 + 17);
    rng.fill(n, cv::RNG::NORMAL, 0.0, 0.1 * std::fabs(all[all.size() / 2]));
    v += n;
    cv::max(v, 0.0f, v);
  } else if (kind == "gamma") {
    // Another monotonic display curve on the same range (the order of levels is kept).
    double lo, hi;
    cv::minMaxLoc(v, &lo, &hi);
    if (hi > lo) {
      for (float& x : v) x = static_cast<float>(lo + (hi - lo) * std::pow((x - lo) / (hi - lo), 0.6));
    }
  } else if (!kind.empty()) {
    std::fprintf(stderr, "bench_field: unknown --perturb %s\n", kind.c_str());
    std::exit(2);
  }
}

Row RunOne(const SynthImage& img, double pixel_mm, bool full, Polygon* found) {
  Row r;
  r.situation = img.situation;
  r.full = full;
  r.linear = img.linear;
  const FieldContext ctx = FieldContextFromHeader(img.header, img.linear);
  const auto t0 = std::chrono::steady_clock::now();
  const FieldMeasurement m = DetectField(img.pixels, ctx);
  const auto t1 = std::chrono::steady_clock::now();
  r.ms = std::chrono::duration<double, std::milli>(t1 - t0).count();
  *found = m.polygon_px;
  const FieldMeasurement& t = *img.truth.field;
  if (std::getenv("BENCH_FIELD_VERBOSE")) {
    // Per side: found/true visibility and how far the found edge's ends lie from the true line.
    for (int k = 0; k < 4; ++k) {
      const auto& fs = m.sides[k];
      const auto& ts = t.sides[k];
      double d = -1.0;
      if (fs.line_px && ts.line_px) {
        // Signed: positive when the found edge lies outside the true field.
        Line tl = LineThrough(ts.line_px->a, ts.line_px->b);
        Point2d c{0, 0};
        for (const Point2d& q : t.polygon_px) {
          c.x += q.x / t.polygon_px.size();
          c.y += q.y / t.polygon_px.size();
        }
        if (tl.SignedDistance(c) > 0) tl = Line{-tl.nx, -tl.ny, -tl.c};
        const double da = tl.SignedDistance(fs.line_px->a), db = tl.SignedDistance(fs.line_px->b);
        d = (std::fabs(da) > std::fabs(db) ? da : db) * pixel_mm;
      }
      std::fprintf(stderr, "  %s found %d true %d conf %.2f end-distance %.2f mm linear %d %s\n",
                   SideName(fs.side), fs.visible, ts.visible, fs.confidence, d, int(img.linear),
                   fs.reason.c_str());
    }
    for (const auto& n : m.notes) std::fprintf(stderr, "  note: %s\n", n.c_str());
  }
  r.side_offsets_mm = SideOffsetsMm(m, t, pixel_mm);
  const double step = std::max(0.25, 0.5 / pixel_mm);  // sample the boundaries every 0.5 mm
  // Under an electronic mask the field cannot be seen: the detector reports those sides as
  // not assessable, and is scored against the true field clipped to the unmasked part.
  Polygon truth_seen = ClipToConvex(t.polygon_px, img.unmasked_px);
  MakeClockwise(truth_seen);
  if (truth_seen.size() < 3) truth_seen = t.polygon_px;
  r.hausdorff_mm = HausdorffDistance(m.polygon_px, truth_seen, step) * pixel_mm;
  // On a double exposure either field is a right answer (which one came first is unknowable).
  if (img.second_field_px) {
    r.hausdorff_mm = std::min(
        r.hausdorff_mm, HausdorffDistance(m.polygon_px, *img.second_field_px, step) * pixel_mm);
  }
  r.baseline_mm =
      HausdorffDistance(Baseline(img.pixels, img.linear), t.polygon_px, step) * pixel_mm;
  for (int k = 0; k < 4; ++k) r.sides_right += m.sides[k].visible == t.sides[k].visible;
  r.open_right = m.open == t.open;
  r.blanked_right = m.blanked == t.blanked;
  r.cropped_right = m.cropped == t.cropped;
  r.double_right = m.double_exposure == t.double_exposure;
  if (std::getenv("BENCH_FIELD_VERBOSE") &&
      !(r.open_right && r.blanked_right && r.cropped_right && r.double_right)) {
    std::fprintf(stderr, "  flags found/true: open %d/%d blanked %d/%d cropped %d/%d double %d/%d\n",
                 m.open, t.open, m.blanked, t.blanked, m.cropped, t.cropped, m.double_exposure,
                 t.double_exposure);
  }
  return r;
}

// A picture of a failure for the developer: the image (log, windowed), the true polygon in
// green and the detected one in red.
void DumpFailure(const std::string& dir, int index, const SynthImage& img, const Polygon& found) {
  cv::Mat1f v(img.pixels.height(), img.pixels.width(), const_cast<float*>(img.pixels.data()));
  cv::Mat1f w = v.clone();
  if (img.linear) {
    cv::max(w, 1e-3f, w);
    cv::log(w, w);
  }
  cv::Mat u8, bgr;
  cv::normalize(w, u8, 0, 255, cv::NORM_MINMAX, CV_8U);
  cv::cvtColor(u8, bgr, cv::COLOR_GRAY2BGR);
  auto draw = [&](const Polygon& p, cv::Scalar colour) {
    std::vector<cv::Point> pts;
    for (const Point2d& q : p) pts.push_back(cv::Point(int(q.x), int(q.y)));
    cv::polylines(bgr, pts, true, colour, std::max(2, bgr.cols / 150));
  };
  draw(img.truth.field->polygon_px, cv::Scalar(0, 200, 0));
  draw(found, cv::Scalar(0, 0, 255));
  const double scale = 400.0 / std::max(bgr.cols, bgr.rows);
  cv::resize(bgr, bgr, cv::Size(), scale, scale, cv::INTER_AREA);
  cv::imwrite(dir + "/" + std::to_string(index) + "-" + img.situation + ".png", bgr);
}

void Print(const std::string& name, const std::vector<Row>& rows) {
  std::vector<double> h, b;
  int gross = 0, bgross = 0, sides = 0, flags = 0;
  for (const Row& r : rows) {
    h.push_back(r.hausdorff_mm);
    b.push_back(r.baseline_mm);
    gross += r.hausdorff_mm > 10.0;
    bgross += r.baseline_mm > 10.0;
    sides += r.sides_right;
    flags += r.open_right && r.blanked_right && r.cropped_right && r.double_right;
  }
  const double n = static_cast<double>(rows.size());
  std::printf("%-16s %4zu | %6.2f %6.2f %7.2f %6.1f%% %6.1f%% %6.1f%% | %7.2f %7.2f %6.1f%%\n",
              name.c_str(), rows.size(), Pct(h, 50), Pct(h, 90), Pct(h, 99), 100.0 * gross / n,
              100.0 * sides / (4 * n), 100.0 * flags / n, Pct(b, 50), Pct(b, 90),
              100.0 * bgross / n);
}

}  // namespace

int main(int argc, char** argv) {
  int count = 420, full = 12;
  uint64_t seed = 20261202;
  double full_mm = 0.143;  // 3000 px across a 430 mm receptor
  std::string dump;         // folder for pictures of the images with a Hausdorff > 2 mm
  std::string only;         // one situation class (its name), for quicker runs while working
  std::string perturb;      // a change to every image after generation (see Perturb)
  for (int i = 1; i + 1 < argc; i += 2) {
    const std::string a = argv[i];
    if (a == "--count") count = std::atoi(argv[i + 1]);
    else if (a == "--full") full = std::atoi(argv[i + 1]);
    else if (a == "--seed") seed = std::strtoull(argv[i + 1], nullptr, 10);
    else if (a == "--full-mm") full_mm = std::atof(argv[i + 1]);
    else if (a == "--dump") dump = argv[i + 1];
    else if (a == "--only") only = argv[i + 1];
    else if (a == "--perturb") perturb = argv[i + 1];
  }
  cv::setNumThreads(1);
  const std::vector<SynthSituation> classes = AllSynthSituations();
  std::vector<Row> rows;
  for (int i = 0; i < count + full; ++i) {
    SynthOptions o;
    o.situation = classes[i % classes.size()];
    if (!only.empty() && only != SynthSituationName(o.situation)) continue;
    const bool is_full = i >= count;
    o.pixel_mm = is_full ? full_mm : 0.5;
    o.syntax = TransferSyntax::kExplicitLittle;
    const SynthScenario sc = RandomScenario(seed, i, o);
    SynthImage img = Generate(sc);
    Perturb(perturb, i, &img.pixels);
    Polygon found;
    rows.push_back(RunOne(img, sc.pixel_mm, is_full, &found));
    if (!dump.empty() && rows.back().hausdorff_mm > 2.0) DumpFailure(dump, i, img, found);
    if (std::getenv("BENCH_FIELD_VERBOSE") && rows.back().hausdorff_mm > 2.0) {
      std::fprintf(stderr, "index %d %s: %.2f mm\n", i, img.situation.c_str(), rows.back().hausdorff_mm);
    }
  }
  std::printf("Field detection on %d synthetic images (%d at 0.5 mm, %d at %.3f mm), seed %llu%s%s\n",
              count + full, count, full, full_mm, static_cast<unsigned long long>(seed),
              perturb.empty() ? "" : ", perturbed: ", perturb.c_str());
  std::printf("Hausdorff distance detected vs true clipped polygon, mm; gross = > 10 mm\n");
  std::printf("%-16s %4s | %6s %6s %7s %7s %7s %7s | %7s %7s %7s\n", "situation", "n", "median",
              "p90", "p99", "gross", "sides", "flags", "base-md", "base-90", "b-gross");
  std::map<std::string, std::vector<Row>> by;
  for (const Row& r : rows) by[r.situation].push_back(r);
  for (const auto& [name, rs] : by) Print(name, rs);
  Print("all", rows);
  // Bias of the refined edges (sides within 5 mm of the truth only).
  for (int lin = 0; lin < 2; ++lin) {
    for (int fu = 0; fu < 2; ++fu) {
      std::vector<double> d, a;
      for (const Row& r : rows) {
        if (r.linear != bool(lin) || r.full != bool(fu)) continue;
        for (double x : r.side_offsets_mm) {
          d.push_back(x);
          a.push_back(std::fabs(x));
        }
      }
      if (d.empty()) continue;
      std::printf("side offset (+ = outside), %s, %s: n %zu, median %+.2f mm, |offset| median "
                  "%.2f p90 %.2f mm\n",
                  lin ? "raw (linear)" : "processed", fu ? "full size" : "0.5 mm", d.size(),
                  Pct(d, 50), Pct(a, 50), Pct(a, 90));
    }
  }
  std::vector<double> ms_full, ms_small;
  for (const Row& r : rows) (r.full ? ms_full : ms_small).push_back(r.ms);
  std::printf("analysis time per image, one core:");
  if (!ms_small.empty()) std::printf(" median %.1f ms (0.5 mm images)", Pct(ms_small, 50));
  if (!ms_full.empty()) {
    std::printf("%s median %.1f ms / max %.1f ms (full size)", ms_small.empty() ? "" : ",",
                Pct(ms_full, 50), Pct(ms_full, 100));
  }
  std::printf("\n");
  return 0;
}
