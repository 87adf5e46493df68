// Accuracy benchmark of the anatomy and collimation metrics on synthetic radiographs with
// exact truth: field detection + metrics against the generator's geometric truth.
// Not a test: it prints figures for docs/validation.md.
//   bench_metrics [--count N] [--seed S] [--pixel-mm P] [--truth-field] [--verbose]
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <map>
#include <string>
#include <vector>

#include "beamtrim/field.h"
#include "beamtrim/metrics.h"
#include "beamtrim/record.h"
#include "beamtrim/rules.h"
#include "beamtrim/synth.h"
#include "analysis/anatomy_internal.h"
#include <opencv2/imgcodecs.hpp>
#include <opencv2/imgproc.hpp>

using namespace beamtrim;

namespace {

struct Args {
  int count = 400;
  uint64_t seed = 20261202;
  double pixel_mm = 0.5;
  bool truth_field = false;  // isolate the metrics from field-detection errors
  bool verbose = false;
  int only = -1;            // --only I: just image I, with diagnostics and a PNG in /tmp
};

Args Parse(int argc, char** argv) {
  Args a;
  for (int i = 1; i < argc; ++i) {
    std::string s = argv[i];
    auto next = [&]() { return i + 1 < argc ? std::string(argv[++i]) : std::string(); };
    if (s == "--count") a.count = std::atoi(next().c_str());
    else if (s == "--seed") a.seed = std::strtoull(next().c_str(), nullptr, 10);
    else if (s == "--pixel-mm") a.pixel_mm = std::atof(next().c_str());
    else if (s == "--truth-field") a.truth_field = true;
    else if (s == "--verbose") a.verbose = true;
    else if (s == "--only") a.only = std::atoi(next().c_str());
  }
  return a;
}

double Quantile(std::vector<double> v, double q) {
  if (v.empty()) return NAN;
  std::sort(v.begin(), v.end());
  double pos = q * (v.size() - 1);
  size_t i = static_cast<size_t>(pos);
  double f = pos - i;
  return i + 1 < v.size() ? v[i] * (1 - f) + v[i + 1] * f : v[i];
}

bool Has(const std::vector<Side>& sides, Side s) {
  return std::find(sides.begin(), sides.end(), s) != sides.end();
}

struct Tally {
  std::vector<double> hausdorff_mm, excess_err, declared_err;
  int clip_total = 0, clip_correct = 0, anatomy_missed = 0, anatomy_spurious = 0, images = 0;
};

void Report(const char* name, const Tally& t) {
  std::printf("%-18s n=%4d  box Hausdorff mm median %.2f p90 %.2f | excess err median %.4f p90 %.4f"
              " | clipping %.1f %% (%d sides) | declared err median %.2f mm (%zu edges)"
              " | anatomy missed %d spurious %d\n",
              name, t.images, Quantile(t.hausdorff_mm, 0.5), Quantile(t.hausdorff_mm, 0.9),
              Quantile(t.excess_err, 0.5), Quantile(t.excess_err, 0.9),
              t.clip_total ? 100.0 * t.clip_correct / t.clip_total : NAN, t.clip_total,
              Quantile(t.declared_err, 0.5), t.declared_err.size(), t.anatomy_missed,
              t.anatomy_spurious);
}

void Score(const ImageRecord& truth, const ImageRecord& rec, double pixel_mm, Tally& t,
           bool verbose, const std::string& name) {
  ++t.images;
  const AnatomyMeasurement& ta = *truth.anatomy;
  const AnatomyMeasurement& ma = *rec.anatomy;
  if (ta.found != ma.found) (ta.found ? t.anatomy_missed : t.anatomy_spurious)++;
  if (ta.found && ma.found && ta.box_px && ma.box_px) {
    Polygon a(ta.box_px->begin(), ta.box_px->end()), b(ma.box_px->begin(), ma.box_px->end());
    double h = HausdorffDistance(a, b, 1.0) * pixel_mm;
    t.hausdorff_mm.push_back(h);
    if (verbose && h > 5.0) std::printf("  %s box Hausdorff %.1f mm\n", name.c_str(), h);
  }
  if (truth.excess && truth.excess->fraction_at_0mm && rec.excess && rec.excess->fraction_at_0mm) {
    double err = std::fabs(*truth.excess->fraction_at_0mm - *rec.excess->fraction_at_0mm);
    t.excess_err.push_back(err);
    if (verbose && err > 0.03) std::printf("  %s excess error %.3f\n", name.c_str(), err);
  }
  for (Side s : kAllSides) {
    if (!truth.field->side(s).visible || !rec.field->side(s).visible) continue;
    ++t.clip_total;
    bool want = Has(ta.clipped_sides, s), got = Has(ma.clipped_sides, s);
    if (want == got) ++t.clip_correct;
    else if (verbose) std::printf("  %s clipping %s: truth %d measured %d\n", name.c_str(), SideName(s), want, got);
  }
  if (truth.declared && rec.declared) {
    for (const DeclaredEdgeDeviation& m : rec.declared->edges) {
      for (const DeclaredEdgeDeviation& d : truth.declared->edges) {
        if (d.side == m.side) t.declared_err.push_back(std::fabs(d.deviation_mm - m.deviation_mm));
      }
    }
  }
}

// Diagnostics for one image: segmentation figures and an overlay PNG (truth green, found red).
void Diagnose(const Radiograph& g, const FieldMeasurement& field, const ImageRecord& truth,
              const ImageRecord& rec, const std::string& name) {
  using namespace anatomy_internal;
  std::array<double, 2> sp = *truth.pixel_spacing_mm;
  Working w = MakeWorking(g.pixels, field, sp, g.linear, 1.0);
  Segmentation s = anatomy_internal::Segment(w, sp, 1.0);
  std::printf("%s linear %d direct %d noise %.4f tissue %.4f threshold %.4f markers %d step %.1f\n",
              name.c_str(), g.linear, s.direct_found, s.noise, s.tissue_level, s.threshold,
              s.markers_removed, s.step);
  cv::Mat full(g.pixels.height(), g.pixels.width(), CV_32F, const_cast<float*>(g.pixels.data()));
  cv::Mat l;
  full.copyTo(l);
  if (g.linear) { cv::max(l, 1e-3, l); cv::log(l, l); }
  cv::Mat out;
  cv::normalize(l, out, 0, 255, cv::NORM_MINMAX, CV_8U);
  cv::cvtColor(out, out, cv::COLOR_GRAY2BGR);
  auto draw = [&](const std::optional<std::array<Point2d, 4>>& box, cv::Scalar colour) {
    if (!box) return;
    for (int i = 0; i < 4; ++i) {
      cv::line(out, cv::Point2d((*box)[i].x, (*box)[i].y),
               cv::Point2d((*box)[(i + 1) % 4].x, (*box)[(i + 1) % 4].y), colour, 2);
    }
  };
  std::vector<std::vector<cv::Point>> contours;
  cv::Mat big;
  cv::resize(s.anatomy, big, out.size(), 0, 0, cv::INTER_NEAREST);
  cv::findContours(big, contours, cv::RETR_EXTERNAL, cv::CHAIN_APPROX_SIMPLE);
  cv::drawContours(out, contours, -1, cv::Scalar(255, 128, 0), 1);
  draw(truth.anatomy->box_px, cv::Scalar(0, 255, 0));
  draw(rec.anatomy->box_px, cv::Scalar(0, 0, 255));
  cv::imwrite("/tmp/bench-" + name + ".png", out);
}

}  // namespace

int main(int argc, char** argv) {
  Args args = Parse(argc, argv);
  auto rules = LoadRules({});
  if (!rules.ok()) {
    std::fprintf(stderr, "%s\n", rules.error().ToString().c_str());
    return 1;
  }
  SynthOptions options;
  options.pixel_mm = args.pixel_mm;
  Tally all;
  double metrics_seconds = 0.0;  // ComputeMetrics (anatomy and the rest), wall clock
  int timed = 0;
  std::map<std::string, Tally> by_situation;
  for (int i = 0; i < args.count; ++i) {
    if (args.only >= 0 && i != args.only) continue;
    SynthScenario sc = RandomScenario(args.seed, i, options);
    SynthImage img = Generate(sc);
    Radiograph g;
    g.header = img.header;
    g.pixels = std::move(img.pixels);
    g.linear = img.linear;
    FieldContext fc{img.truth.pixel_spacing_mm, img.linear};
    FieldMeasurement field = args.truth_field ? *img.truth.field : DetectField(g.pixels, fc);
    ImageRecord rec;
    rec.pixel_spacing_mm = img.truth.pixel_spacing_mm;
    rec.context = img.truth.context;
    rec.field = field;
    auto t0 = std::chrono::steady_clock::now();
    ComputeMetrics(g, field, **rules, &rec);
    metrics_seconds += std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
    ++timed;
    Score(img.truth, rec, args.pixel_mm, all, args.verbose, img.name + " " + img.situation + " " +
          SynthBodyPartName(sc.body_part));
    Score(img.truth, rec, args.pixel_mm, by_situation[img.situation], false, "");
    if (args.verbose && img.truth.pixel_spacing_mm) {
      using namespace anatomy_internal;
      Working w = MakeWorking(g.pixels, field, *img.truth.pixel_spacing_mm, g.linear, 1.0);
      Segmentation s = anatomy_internal::Segment(w, *img.truth.pixel_spacing_mm, 1.0);
      std::printf("  %s %s linear %d direct %d step %.1f\n", img.name.c_str(),
                  img.situation.c_str(), g.linear, s.direct_found, s.step);
    }
    if (args.only >= 0) {
      Diagnose(g, field, img.truth, rec, img.name);
      for (const auto& n : rec.notes) std::printf("note: %s\n", n.c_str());
      auto sides = [](const std::vector<Side>& v) {
        std::string t;
        for (Side x : v) t += std::string(SideName(x)) + " ";
        return t;
      };
      const AnatomyMeasurement& a = *rec.anatomy;
      std::printf("at blade: %s| ends: %s| continuing: %s| cut off: %s| truth cut off: %s\n",
                  sides(a.at_blade_sides).c_str(),
                  a.ends ? sides({(*a.ends)[0], (*a.ends)[1]}).c_str() : "unknown ",
                  a.continuing_end ? SideName(*a.continuing_end) : "none",
                  sides(a.clipped_sides).c_str(), sides(img.truth.anatomy->clipped_sides).c_str());
    }
  }
  std::printf("bench_metrics: %d images, seed %llu, pixel %.2f mm, field from %s\n", args.count,
              static_cast<unsigned long long>(args.seed), args.pixel_mm,
              args.truth_field ? "the truth" : "DetectField");
  for (const auto& [name, t] : by_situation) Report(name.c_str(), t);
  Report("ALL", all);
  if (timed > 0) std::printf("metrics step: %.1f ms per image (mean of %d)\n", 1000.0 * metrics_seconds / timed, timed);
  return 0;
}
