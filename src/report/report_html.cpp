// The department report and the feedback sheets as HTML documents.
#include <cstdio>

#include "beamtrim/report.h"
#include "report/html.h"
#include "report/tips.h"

namespace beamtrim {
namespace {

using namespace report_internal;

std::string MonthTitle(const std::string& period) {
  static constexpr const char* kMonths[] = {"January", "February", "March",     "April",
                                            "May",     "June",     "July",      "August",
                                            "September", "October", "November", "December"};
  if (period.size() != 7) return period;
  const int m = std::atoi(period.substr(5, 2).c_str());
  if (m < 1 || m > 12) return period;
  return std::string(kMonths[m - 1]) + " " + period.substr(0, 4);
}

std::string Tile(const std::string& value, const std::string& what, const std::string& extra = {}) {
  return "<li><span class=\"value\">" + Escape(value) + "</span><span class=\"what\">" +
         Escape(what) + "</span>" +
         (extra.empty() ? "" : "<span class=\"dept\">" + Escape(extra) + "</span>") + "</li>\n";
}

std::string KapTileValue(const ReportFigures& f) {
  return f.kap_images > 0 ? Kap(f.avoidable_kap_dgy_cm2) : "\u2013";
}

std::string FiguresTiles(const ReportFigures& f) {
  std::string s = "<ul class=\"figures\">\n";
  s += Tile(Count(f.images), "images measured");
  s += Tile(Pct(f.PercentAssessable()), "assessable",
            Count(f.assessable) + (f.assessable == 1 ? " image" : " images"));
  s += Tile(FractionPct(f.median_excess), "median excess fraction",
            "share of the field outside the anatomy");
  s += Tile(Pct(f.PercentAllBordersVisible()), "all four borders visible",
            Count(f.all_borders_visible) + " of " + Count(f.with_field) + " images");
  s += Tile(KapTileValue(f), "avoidable KAP, estimated",
            "from " + Count(f.kap_images) + " images with a recorded KAP");
  return s + "</ul>\n";
}

std::string Masthead(const ReportModel& m, const std::string& kicker, const std::string& title) {
  std::string s = "<header class=\"masthead\">\n<p class=\"kicker\">" + Escape(kicker) + "</p>\n<h1>" +
                  Escape(title) + "</h1>\n<p class=\"meta\">Images studied in " +
                  Escape(MonthTitle(m.period)) + " \u00b7 generated " + Escape(m.generated_utc) +
                  " \u00b7 beamtrim " + Escape(m.software_version) + "</p>\n";
  s += "<p class=\"meta\">" +
       std::string(m.pseudonymised ? "Staff are shown by pseudonym (keyed hash); cases by a short "
                                     "case number derived from the image, never by patient data."
                                   : "Staff are shown by their recorded operator name: keep this "
                                     "document within the department. Cases are shown by a short "
                                     "case number, never by patient data.") +
       "</p>\n</header>\n";
  return s;
}

std::string MethodSection() {
  return R"HTML(<section aria-labelledby="method-h">
<h2 id="method-h">How it was measured</h2>
<p>Each image was read from its DICOM file. The exposed field is found in the pixels: the shadow
of each collimator blade is located and fitted with a straight edge, so masking or cropping done
after the exposure does not hide it. The anatomy inside the field is segmented and enclosed in a
box aligned with the field. The <strong>excess fraction</strong> is the part of the field area
outside that box (no margin added), as a share of the field area.</p>
<p>An image is <strong>assessable</strong> when the rules for its body part and view could be
applied; it <strong>needs review</strong> when the excess fraction is above the rule's limit,
a required border is not visible, or the anatomy runs into more blade edges than allowed.
<strong>Avoidable KAP</strong> is the recorded air kerma-area product times the excess fraction:
KAP does not change along the beam (IAEA TRS-457), so at a fixed kerma it is proportional to field
area, assuming a uniform field (heel effect ignored).</p>
<p>The trend is a p-chart (Montgomery, <cite>Introduction to Statistical Quality Control</cite>): the
monthly share of assessable images that need review, with a centre line over the months shown
and 3-sigma limits that widen in months with fewer images. A month beyond a limit is a signal
worth a look, not a verdict.</p>
<h3>Limits of the method</h3>
<ul>
<li>Automatic measurement can fail on unusual images (shields, implants, double exposures); the
pictures let you check a case by eye.</li>
<li>The anatomy box is a proxy for the region the exam needs; departments set their own margins
and limits in the rules file.</li>
<li>Sides are named as the image is displayed, not by patient orientation.</li>
<li>Images without a recorded KAP add nothing to the avoidable KAP total.</li>
</ul>
</section>
)HTML";
}

std::vector<Bar> MedianBars(const std::vector<GroupFigures>& groups) {
  std::vector<Bar> bars;
  for (const GroupFigures& g : groups) {
    std::optional<double> pct;
    if (g.figures.median_excess) pct = 100.0 * *g.figures.median_excess;
    bars.push_back({g.label, pct, g.figures.assessable});
  }
  return bars;
}

std::string CasesSection(const std::vector<CaseSummary>& cases, bool show_radiographer) {
  if (cases.empty()) return "<p>No assessable images with a measured excess in this period.</p>\n";
  std::string s = OverlayLegend() + "<div class=\"cases\">\n";
  for (const CaseSummary& c : cases) s += CaseFigure(c, show_radiographer);
  return s + "</div>\n";
}

}  // namespace

std::string RenderReportHtml(const ReportModel& m) {
  const std::string month = MonthTitle(m.period);
  const ReportFigures& d = m.department;
  std::string s = PageStart("Collimation audit, " + month);
  s += Masthead(m, "beamtrim \u00b7 collimation audit", "Collimation audit, " + month);
  s += "<nav aria-label=\"Sections\"><ol><li><a href=\"#figures-h\">Figures</a></li>"
       "<li><a href=\"#dist-h\">Distribution</a></li><li><a href=\"#trend-h\">Trend</a></li>"
       "<li><a href=\"#groups-h\">By radiographer, room, exam</a></li>"
       "<li><a href=\"#cases-h\">Cases</a></li><li><a href=\"#method-h\">Method</a></li>"
       "<li><a href=\"#cautions-h\">Cautions</a></li></ol></nav>\n<main>\n";
  s += CautionsBox(false);
  s += "<section aria-labelledby=\"figures-h\">\n<h2 id=\"figures-h\">The period in figures</h2>\n";
  s += FiguresTiles(d);
  s += "<p>" + Pct(d.PercentNeedsReview()) + " of assessable images need review (" +
       Count(d.needs_review) + " of " + Count(d.assessable) + "); the anatomy ran into a blade "
       "edge on " + Count(d.clipped) + (d.clipped == 1 ? " image and " : " images and ") +
       Count(d.masked_or_cropped) +
       (d.masked_or_cropped == 1 ? " image was" : " images were") +
       " masked or cropped after exposure.</p>\n</section>\n";
  s += "<section aria-labelledby=\"dist-h\">\n<h2 id=\"dist-h\">Distribution of the excess fraction</h2>\n"
       "<p>How much of each exposed field lay outside the anatomy box. Bars further right are "
       "images with more unnecessary exposed area.</p>\n" +
       HistogramSvg(m.excess_histogram, "chart-hist") + "</section>\n";
  s += "<section aria-labelledby=\"trend-h\">\n<h2 id=\"trend-h\">Monthly trend</h2>\n" +
       PChartSvg(m.trend, "chart-trend", "Share of assessable images needing review, by month") +
       "</section>\n";
  s += "<section aria-labelledby=\"groups-h\">\n<h2 id=\"groups-h\">By radiographer, room and exam</h2>\n";
  s += BarsSvg(MedianBars(m.radiographers), "chart-people", "Median excess fraction by radiographer",
               d.median_excess ? std::optional<double>(100.0 * *d.median_excess) : std::nullopt,
               "department");
  s += GroupTable(m.radiographers, "Radiographers", "Radiographer");
  s += GroupTable(m.rooms, "Rooms (Station Name)", "Room");
  s += RoomQcTable(m.room_qc);
  s += GroupTable(m.exams, "Exams (body part and view)", "Exam");
  s += "</section>\n";
  s += "<section aria-labelledby=\"cases-h\">\n<h2 id=\"cases-h\">Cases with the largest excess</h2>\n"
       "<p>The " + std::to_string(m.worst.size()) + " assessable images of the period with the largest "
       "excess fraction, drawn from their source files.</p>\n" +
       CasesSection(m.worst, true) + "</section>\n";
  s += MethodSection();
  s += CautionsBox(true) + "</main>\n";
  s += "<footer><p>Records read from the store: " + Count(m.records_seen) +
       ". Measured with beamtrim " + Escape(m.software_version) + ".</p></footer>\n";
  return s + PageEnd();
}

std::string RenderFeedbackHtml(const ReportModel& m, const RadiographerSheet& sheet) {
  const std::string month = MonthTitle(m.period);
  const ReportFigures& me = sheet.figures;
  const ReportFigures& d = m.department;
  std::string s = PageStart("Collimation feedback for " + sheet.label + ", " + month);
  s += Masthead(m, "beamtrim \u00b7 collimation feedback \u00b7 for coaching",
                "Collimation feedback: " + sheet.label);
  s += "<main>\n" + CautionsBox(false);
  s += "<section aria-labelledby=\"you-h\">\n<h2 id=\"you-h\">Your figures beside the department's</h2>\n";
  s += "<table class=\"compare\">\n<caption>" + Escape(month) + "</caption>\n<thead><tr><th scope=\"col\" class=\"l\">"
       "Figure</th><th scope=\"col\">You</th><th scope=\"col\">Department</th></tr></thead>\n<tbody>\n";
  auto row = [&s](const std::string& what, const std::string& mine, const std::string& dept) {
    s += "<tr><th scope=\"row\">" + Escape(what) + "</th><td>" + Escape(mine) + "</td><td>" +
         Escape(dept) + "</td></tr>\n";
  };
  row("Images measured", Count(me.images), Count(d.images));
  row("Assessable", Pct(me.PercentAssessable()), Pct(d.PercentAssessable()));
  row("Median excess fraction", FractionPct(me.median_excess), FractionPct(d.median_excess));
  row("All four borders visible", Pct(me.PercentAllBordersVisible()), Pct(d.PercentAllBordersVisible()));
  row("Needs review", Pct(me.PercentNeedsReview()), Pct(d.PercentNeedsReview()));
  row("Anatomy clipped (images)", Count(me.clipped), Count(d.clipped));
  row("Avoidable KAP, estimated", KapTileValue(me), KapTileValue(d));
  s += "</tbody>\n</table>\n</section>\n";
  s += "<section aria-labelledby=\"tips-h\">\n<h2 id=\"tips-h\">What the figures suggest</h2>\n<ul class=\"tips\">\n";
  for (const std::string& tip : sheet.tips) s += "<li>" + Escape(tip) + "</li>\n";
  s += "</ul>\n</section>\n";
  s += "<section aria-labelledby=\"trend-h\">\n<h2 id=\"trend-h\">Your monthly trend</h2>\n" +
       PChartSvg(sheet.trend, "chart-trend", "Share of your assessable images needing review, by month") +
       "</section>\n";
  s += "<section aria-labelledby=\"cases-h\">\n<h2 id=\"cases-h\">Your images with the largest excess</h2>\n" +
       CasesSection(sheet.cases, false) + "</section>\n";
  s += CautionsBox(true) + "</main>\n";
  s += "<footer><p>Produced with beamtrim " + Escape(m.software_version) +
       " for a coaching conversation. How the figures are computed: see the department report, "
       "section \u201cHow it was measured\u201d.</p></footer>\n";
  return s + PageEnd();
}

}  // namespace beamtrim
