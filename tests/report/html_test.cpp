// The HTML documents: content, privacy, accessibility basics and palette contrast.
#include <cmath>
#include <regex>
#include <string>

#include <doctest/doctest.h>

#include "beamtrim/report.h"
#include "report/fixtures.h"
#include "report/html.h"
#include "report/palette.h"

namespace beamtrim {
namespace {

namespace pal = report_palette;

size_t CountOf(const std::string& text, const std::string& needle) {
  size_t n = 0;
  for (size_t pos = text.find(needle); pos != std::string::npos; pos = text.find(needle, pos + 1)) ++n;
  return n;
}

// WCAG 2.1, "relative luminance" and "contrast ratio" (Understanding SC 1.4.3): sRGB channels
// linearised with the 0.03928 threshold, L = 0.2126 R + 0.7152 G + 0.0722 B,
// ratio = (L1 + 0.05) / (L2 + 0.05).
double Luminance(pal::Rgb c) {
  auto lin = [](uint8_t v) {
    const double s = v / 255.0;
    return s <= 0.03928 ? s / 12.92 : std::pow((s + 0.055) / 1.055, 2.4);
  };
  return 0.2126 * lin(c.r) + 0.7152 * lin(c.g) + 0.0722 * lin(c.b);
}
double Contrast(pal::Rgb a, pal::Rgb b) {
  const double la = Luminance(a), lb = Luminance(b);
  return (std::max(la, lb) + 0.05) / (std::min(la, lb) + 0.05);
}

void CheckAccessibleBasics(const std::string& html) {
  // Every image has a non-empty alt text. Plain string search: std::regex recurses once per
  // character and overflows the stack on a long data: URI (notably under AddressSanitizer).
  for (size_t at = html.find("<img"); at != std::string::npos; at = html.find("<img", at + 4)) {
    const size_t end = html.find('>', at);
    REQUIRE(end != std::string::npos);
    const std::string tag = html.substr(at, end - at);
    const size_t alt = tag.find("alt=\"");
    REQUIRE(alt != std::string::npos);
    const size_t close = tag.find('"', alt + 5);
    CHECK((close == std::string::npos ? tag.size() : close) - (alt + 5) >= 20);
  }
  // Every table has header cells with a scope.
  CHECK(CountOf(html, "<table") > 0);
  CHECK(CountOf(html, "<table") <= CountOf(html, "<th scope=\"col\""));
  CHECK(CountOf(html, "<th>") == 0);
  // Exactly one h1; headings never skip a level (h1 -> h2 -> h3).
  CHECK(CountOf(html, "<h1") == 1);
  int previous = 0;
  const std::regex heading(R"(<h([1-6])\b)");
  for (auto it = std::sregex_iterator(html.begin(), html.end(), heading); it != std::sregex_iterator(); ++it) {
    const int level = std::stoi((*it)[1].str());
    CHECK(level <= previous + 1);
    previous = level;
  }
  // Charts are labelled images.
  CHECK(CountOf(html, "<svg id=") == CountOf(html, "role=\"img\" aria-labelledby="));
  CHECK(html.find("<html lang=\"en\">") != std::string::npos);
}

}  // namespace

TEST_CASE("WcagContrastFormulaMatchesPublishedValues") {
  // WCAG 2.1: black on white is 21:1; #767676 on white is the well-known 4.54:1 AA boundary.
  CHECK(Contrast({0, 0, 0}, {255, 255, 255}) == doctest::Approx(21.0));
  CHECK(Contrast({0x76, 0x76, 0x76}, {255, 255, 255}) == doctest::Approx(4.54).epsilon(0.002));
}

TEST_CASE("ReportPaletteMeetsWcagAaContrast") {
  // Text: 4.5:1 (SC 1.4.3). Chart marks and rules against the paper: 3:1 (SC 1.4.11).
  CHECK(Contrast(pal::kInk, pal::kPaper) >= 4.5);
  CHECK(Contrast(pal::kInk, pal::kPanel) >= 4.5);
  CHECK(Contrast(pal::kMuted, pal::kPaper) >= 4.5);
  CHECK(Contrast(pal::kMuted, pal::kPanel) >= 4.5);
  CHECK(Contrast(pal::kAccent, pal::kPaper) >= 4.5);  // links and the kicker
  CHECK(Contrast(pal::kCautionInk, pal::kCautionBg) >= 4.5);
  CHECK(Contrast(pal::kChartBar, pal::kPaper) >= 3.0);
  CHECK(Contrast(pal::kChartLimit, pal::kPaper) >= 3.0);
  CHECK(Contrast(pal::kRule, pal::kPaper) >= 3.0);
  // Overlay labels: white text on the near-black plate.
  CHECK(Contrast({255, 255, 255}, {15, 15, 15}) >= 4.5);
}

TEST_CASE("ReportHasEveryPartAndNoPatientIdentifiers") {
  ReportModel m = testing::MakeSampleModel();
  const std::string html = RenderReportHtml(m);
  CHECK(html.find("The period in figures") != std::string::npos);
  CHECK(html.find("Distribution of the excess fraction") != std::string::npos);
  CHECK(html.find("Monthly trend") != std::string::npos);
  CHECK(html.find("Cases with the largest excess") != std::string::npos);
  CHECK(html.find("How it was measured") != std::string::npos);
  CHECK(html.find("not patient dose records") != std::string::npos);
  CHECK(html.find("for coaching") != std::string::npos);
  CHECK(html.find("medical physicist") != std::string::npos);
  CHECK(CountOf(html, "<svg id=") == 3);  // histogram, trend, bars
  CHECK(CountOf(html, "src=\"data:image/png;base64,") == m.worst.size() - 1);
  CHECK(html.find("Picture not available") != std::string::npos);
  // No source path, patient-like folder name or UID; no external resource.
  CHECK(html.find("DOE^JANE") == std::string::npos);
  CHECK(html.find("/archive/") == std::string::npos);
  CHECK(html.find("1.2.826.0.1.3680043") == std::string::npos);
  CHECK(html.find("http://") == html.find("http://www.w3.org/2000/svg"));
  CHECK(html.find("https://") == std::string::npos);
  CHECK(html.find(" src=\"http") == std::string::npos);
  CHECK(html.find("@page{size:A4") != std::string::npos);
  CheckAccessibleBasics(html);
}

TEST_CASE("CountsInSentencesAgreeInNumber") {
  // English grammar (one image, two images): the summary sentence and the tiles must read
  // right for a count of one.
  ReportModel m = testing::MakeSampleModel();
  m.department.clipped = 1;
  m.department.masked_or_cropped = 1;
  m.department.assessable = 1;
  const std::string html = RenderReportHtml(m);
  CHECK(html.find("edge on 1 image and 1 image was masked or cropped") != std::string::npos);
  CHECK(html.find("1 images") == std::string::npos);
  m.department.clipped = 2;
  m.department.masked_or_cropped = 3;
  const std::string plural = RenderReportHtml(m);
  CHECK(plural.find("edge on 2 images and 3 images were masked or cropped") != std::string::npos);
}

TEST_CASE("FeedbackSheetShowsPersonBesideDepartmentWithTips") {
  ReportModel m = testing::MakeSampleModel();
  REQUIRE(m.sheets.size() == 3);
  const RadiographerSheet& sheet = m.sheets[0];
  const std::string html = RenderFeedbackHtml(m, sheet);
  CHECK(html.find("Collimation feedback: RT-07") != std::string::npos);
  CHECK(html.find("<th scope=\"col\">You</th><th scope=\"col\">Department</th>") != std::string::npos);
  CHECK(sheet.cases.size() == 3);
  CHECK(CountOf(html, "<figure class=\"case\">") == 3);
  REQUIRE_FALSE(sheet.tips.empty());
  CHECK(html.find(report_internal::Escape(sheet.tips[0])) != std::string::npos);
  CHECK(html.find("RT-12") == std::string::npos);  // no other person on the sheet
  CHECK(html.find("DOE^JANE") == std::string::npos);
  CHECK(html.find("@page{size:A4") != std::string::npos);
  CheckAccessibleBasics(html);
}

TEST_CASE("PseudonymisedReportShowsNoStaffNames") {
  ReportModel m = testing::MakeSampleModel(
      [](const std::string& name) { return "STAFF-" + std::to_string(std::hash<std::string>{}(name) % 1000); });
  const std::string html = RenderReportHtml(m);
  CHECK(html.find("RT-07") == std::string::npos);
  CHECK(html.find("RT-12") == std::string::npos);
  CHECK(html.find("STAFF-") != std::string::npos);
  CHECK(html.find("shown by pseudonym") != std::string::npos);
}

TEST_CASE("EscapingNeutralisesMarkupInRecordedNames") {
  CHECK(report_internal::Escape("<b>R&D \"x\" 'y'</b>") ==
        "&lt;b&gt;R&amp;D &quot;x&quot; &#39;y&#39;&lt;/b&gt;");
  ReportOptions o;
  o.period = "2026-11";
  ReportBuilder b(o);
  ImageRecord r = testing::MakePhantomRecord();
  r.context.operator_name = "<script>alert(1)</script>";
  b.Add(r);
  const std::string html = RenderReportHtml(b.Finish());
  CHECK(html.find("<script") == std::string::npos);
}

TEST_CASE("EmptyPeriodStillRendersAReadablePage") {
  ReportOptions o;
  o.period = "2026-11";
  ReportBuilder b(o);
  const std::string html = RenderReportHtml(b.Finish());
  CHECK(html.find("no trend") != std::string::npos);
  CHECK(html.find("No assessable images") != std::string::npos);
  CheckAccessibleBasics(html);
}

}  // namespace beamtrim
