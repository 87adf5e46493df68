// ReportBuilder: figures, groups, histogram, trend, worst cases and tips from constructed
// records (synthetic ground truth: every expected value below is worked out by hand).
#include <cmath>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "beamtrim/report.h"
#include "report/fixtures.h"
#include "report/tips.h"

namespace beamtrim {
namespace {

ImageRecord Rec(const std::string& who, const std::string& month, double excess,
                const std::string& outcome, int index) {
  ImageRecord r = testing::MakePhantomRecord();
  r.sop_instance_uid = "1.2.826.0.1.3680043.10.999." + std::to_string(index);
  r.file = "/archive/PATIENT^NAME" + std::to_string(index) + "/img.dcm";
  r.context.operator_name = who;
  r.context.month = month;
  r.context.study_date = month.substr(0, 4) + month.substr(5, 2) + "15";
  r.excess->fraction_at_0mm = excess;
  r.dose->avoidable_kap_dgy_cm2 = 0.2 * excess;
  r.verdict->outcome = outcome;
  return r;
}

ReportOptions Options() {
  ReportOptions o;
  o.period = "2026-11";
  return o;
}

}  // namespace

TEST_CASE("PeriodValidationNamesTheOption") {
  ReportOptions o;
  o.period = "2026-13";
  Status s = o.Validate();
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().attribute == "--period");
  o.period = "2026-11";
  CHECK(o.Validate().ok());
}

TEST_CASE("FiguresCountOnlyThePeriodAndTheMedianIsTheMiddleValue") {
  ReportBuilder b(Options());
  // Period: RT-01 excess 0.1, 0.3, 0.5 (needs review on the last); RT-02 excess 0.2.
  b.Add(Rec("RT-01", "2026-11", 0.1, "acceptable", 1));
  b.Add(Rec("RT-01", "2026-11", 0.3, "acceptable", 2));
  b.Add(Rec("RT-01", "2026-11", 0.5, "needs review", 3));
  b.Add(Rec("RT-02", "2026-11", 0.2, "acceptable", 4));
  // Not assessable in the period: counts as an image, not in the median.
  b.Add(Rec("RT-02", "2026-11", 0.9, "not assessable", 5));
  // Earlier month: trend only. Later month: ignored. Error record: ignored.
  b.Add(Rec("RT-01", "2026-10", 0.8, "needs review", 6));
  b.Add(Rec("RT-01", "2026-12", 0.8, "needs review", 7));
  ImageRecord failed = Rec("RT-01", "2026-11", 0.8, "needs review", 8);
  failed.status = RecordStatus::kError;
  b.Add(failed);
  ReportModel m = b.Finish();

  const ReportFigures& d = m.department;
  CHECK(d.images == 5);
  CHECK(d.assessable == 4);
  // Median of {0.1, 0.2, 0.3, 0.5} = (0.2 + 0.3) / 2.
  REQUIRE(d.median_excess);
  CHECK(*d.median_excess == doctest::Approx(0.25));
  CHECK(*d.PercentAssessable() == doctest::Approx(80.0));
  CHECK(*d.PercentNeedsReview() == doctest::Approx(25.0));
  // The fixture's bottom side has no border: no image has all four visible.
  CHECK(*d.PercentAllBordersVisible() == doctest::Approx(0.0));
  CHECK(d.side_without_border[static_cast<int>(Side::kBottom)] == 5);
  // Avoidable KAP: 0.2 x (0.1 + 0.3 + 0.5 + 0.2) dGy cm2 over the 4 assessable images.
  CHECK(d.kap_images == 4);
  CHECK(d.avoidable_kap_dgy_cm2 == doctest::Approx(0.22));
  REQUIRE(m.radiographers.size() == 2);
  CHECK(m.radiographers[0].label == "RT-01");
  CHECK(m.radiographers[0].figures.images == 3);
  CHECK(*m.radiographers[0].figures.median_excess == doctest::Approx(0.3));
  // Histogram: 5 % bins; 0.1 -> bin 2, 0.2 -> 4, 0.3 -> 6, 0.5 -> 10.
  CHECK(m.excess_histogram[2] == 1);
  CHECK(m.excess_histogram[4] == 1);
  CHECK(m.excess_histogram[6] == 1);
  CHECK(m.excess_histogram[10] == 1);
  // Trend: October and November, not December.
  REQUIRE(m.trend.size() == 2);
  CHECK(m.trend[0].month == "2026-10");
  CHECK(m.trend[1].n == 4);
  CHECK(m.trend[1].nonconforming == 1);
  CHECK(m.records_seen == 8);
}

// Montgomery, Introduction to Statistical Quality Control, p chart with variable n:
// p_bar = sum(d) / sum(n); limits p_bar +- 3 sqrt(p_bar (1 - p_bar) / n_i). Worked by hand:
// four months of 100 assessable images with 5, 25, 25, 45 needing review: p_bar = 100/400 =
// 0.25, sigma = sqrt(0.25 * 0.75 / 100) = 0.0433, limits 0.1201 .. 0.3799; 0.05 is below the
// lower limit and 0.45 above the upper one.
TEST_CASE("TrendLimitsFollowThePChartFormula") {
  ReportBuilder b(Options());
  const std::vector<std::string> months = {"2026-08", "2026-09", "2026-10", "2026-11"};
  const int bad[] = {5, 25, 25, 45};
  int index = 0;
  for (size_t k = 0; k < months.size(); ++k) {
    for (int i = 0; i < 100; ++i) {
      b.Add(Rec("RT-03", months[k], 0.2, i < bad[k] ? "needs review" : "acceptable", ++index));
    }
  }
  ReportModel m = b.Finish();
  REQUIRE(m.trend.size() == 4);
  CHECK(m.trend[0].limits.centre == doctest::Approx(0.25));
  CHECK(m.trend[0].limits.upper == doctest::Approx(0.25 + 3 * std::sqrt(0.25 * 0.75 / 100)));
  CHECK(m.trend[0].limits.lower == doctest::Approx(0.25 - 3 * std::sqrt(0.25 * 0.75 / 100)));
  CHECK(m.trend[0].out_of_control);
  CHECK_FALSE(m.trend[1].out_of_control);
  CHECK_FALSE(m.trend[2].out_of_control);
  CHECK(m.trend[3].out_of_control);
  CHECK(m.trend[0].limits.lower == doctest::Approx(0.1201).epsilon(0.001));
  REQUIRE(m.sheets.size() == 1);
  CHECK(m.sheets[0].trend.size() == 4);
}

TEST_CASE("WorstCasesAreTheLargestExcessFirstAndSheetsKeepThree") {
  ReportOptions o = Options();
  o.worst_cases = 3;
  ReportBuilder b(o);
  const double excess[] = {0.15, 0.62, 0.05, 0.48, 0.71, 0.33, 0.29};
  for (int i = 0; i < 7; ++i) b.Add(Rec(i % 2 ? "RT-05" : "RT-04", "2026-11", excess[i], "acceptable", i));
  ReportModel m = b.Finish();
  REQUIRE(m.worst.size() == 3);
  CHECK(m.worst[0].excess_fraction == doctest::Approx(0.71));
  CHECK(m.worst[1].excess_fraction == doctest::Approx(0.62));
  CHECK(m.worst[2].excess_fraction == doctest::Approx(0.48));
  CHECK(m.worst[0].case_id.rfind("C-", 0) == 0);
  CHECK(m.worst[0].case_id.size() == 10);
  REQUIRE(m.sheets.size() == 2);
  // RT-04 had 0.15, 0.05, 0.71, 0.29: its three largest.
  REQUIRE(m.sheets[0].cases.size() == 3);
  CHECK(m.sheets[0].cases[0].excess_fraction == doctest::Approx(0.71));
  CHECK(m.sheets[0].cases[2].excess_fraction == doctest::Approx(0.15));
}

TEST_CASE("StaffLabelFunctionReplacesNamesEverywhere") {
  ReportOptions o = Options();
  o.staff_label = [](const std::string& name) { return "STAFF-" + std::to_string(name.size()); };
  ReportBuilder b(o);
  b.Add(Rec("Jane Example", "2026-11", 0.4, "acceptable", 1));
  ReportModel m = b.Finish();
  REQUIRE(m.radiographers.size() == 1);
  CHECK(m.radiographers[0].label == "STAFF-12");
  CHECK(m.worst[0].radiographer == "STAFF-12");
  CHECK(m.sheets[0].label == "STAFF-12");
}

TEST_CASE("TipsNameTheSideMostOftenLeftWithoutABorder") {
  ReportFigures me, dept;
  me.images = me.with_field = 10;
  me.side_without_border = {0, 1, 0, 6};
  me.median_excess = 0.40;
  dept.median_excess = 0.25;
  me.clipped = 1;
  auto tips = report_internal::FeedbackTips(me, dept);
  REQUIRE(tips.size() == 3);
  CHECK(tips[0].find("bottom edge") != std::string::npos);
  CHECK(tips[0].find("6 of 10") != std::string::npos);
  CHECK(tips[1].find("40 %") != std::string::npos);
  CHECK(tips[1].find("25 %") != std::string::npos);
  CHECK(tips[2].find("1 image ") != std::string::npos);
  // Below the thresholds: praise instead of a side tip.
  me.side_without_border = {0, 0, 0, 0};
  me.median_excess = 0.2;
  me.clipped = 0;
  tips = report_internal::FeedbackTips(me, dept);
  REQUIRE(tips.size() == 1);
  CHECK(tips[0].find("close to or below") != std::string::npos);
}

}  // namespace beamtrim
