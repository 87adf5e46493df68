// ReportBuilder: streaming aggregation of image records into the report model.
#include <algorithm>
#include <cmath>
#include <ctime>
#include <map>
#include <memory>
#include <regex>

#include "beamtrim/report.h"
#include "beamtrim/store.h"
#include "beamtrim/version.h"
#include "report/tips.h"
#include "store/sha256.h"

namespace beamtrim {
namespace {

std::optional<double> Percent(int64_t part, int64_t whole) {
  if (whole <= 0) return std::nullopt;
  return 100.0 * static_cast<double>(part) / static_cast<double>(whole);
}

// Median by the same quantile definition as the audit tables (tables.h, Hyndman & Fan 7).
std::optional<double> Median(std::vector<double> values) {
  if (values.empty()) return std::nullopt;
  std::sort(values.begin(), values.end());
  return Quantile(values, 0.5);
}

// Figures plus the excess fractions they need for the median.
struct Tally {
  ReportFigures figures;
  std::vector<double> excess;

  void Add(const ImageRecord& r, const ExtractedColumns& c) {
    ReportFigures& f = figures;
    ++f.images;
    if (r.field) {
      ++f.with_field;
      f.all_borders_visible += c.all_borders_visible;
      for (Side s : kAllSides) {
        f.side_without_border[static_cast<int>(s)] += ClassifySide(r, s) == SideState::kNotVisible;
      }
    }
    f.clipped += c.anatomy_clipped;
    f.masked_or_cropped += c.blanked_or_cropped;
    if (!c.assessable) return;
    ++f.assessable;
    f.needs_review += c.outcome == "needs review";
    if (c.excess_fraction) excess.push_back(*c.excess_fraction);
    if (c.avoidable_kap_dgy_cm2) {
      ++f.kap_images;
      f.kap_dgy_cm2 += c.kap_dgy_cm2.value_or(0.0);
      f.avoidable_kap_dgy_cm2 += *c.avoidable_kap_dgy_cm2;
    }
  }
  ReportFigures Done() const {
    ReportFigures f = figures;
    f.median_excess = Median(excess);
    return f;
  }
};

struct MonthCount {
  int64_t n = 0;
  int64_t defects = 0;
};

// The `keep` cases with the largest excess fraction, smallest at the front of a min-heap.
struct WorstCases {
  size_t keep = 0;
  std::vector<CaseSummary> heap;
  static bool Greater(const CaseSummary& a, const CaseSummary& b) {
    return a.excess_fraction > b.excess_fraction;
  }
  bool Wants(double excess) const {
    return keep > 0 && (heap.size() < keep || excess > heap.front().excess_fraction);
  }
  void Offer(CaseSummary c) {
    heap.push_back(std::move(c));
    std::push_heap(heap.begin(), heap.end(), Greater);
    if (heap.size() > keep) {
      std::pop_heap(heap.begin(), heap.end(), Greater);
      heap.pop_back();
    }
  }
  std::vector<CaseSummary> Sorted() const {
    std::vector<CaseSummary> out = heap;
    std::sort(out.begin(), out.end(), Greater);
    return out;
  }
};

}  // namespace

std::string CaseIdFor(const ImageRecord& r) {
  const std::string key = !r.sop_instance_uid.empty() ? r.sop_instance_uid : r.file;
  const auto digest = store_internal::Sha256Of("beamtrim-case:" + key);
  std::string hex = store_internal::ToHex(digest.data(), 4);
  std::transform(hex.begin(), hex.end(), hex.begin(), ::toupper);
  return "C-" + hex;
}

namespace {

std::string ExamLabel(const RecordContext& c) {
  std::string exam = c.body_part.empty() ? "(no body part)" : c.body_part;
  if (!c.view.empty()) exam += " " + c.view;
  return exam;
}

std::vector<TrendPoint> TrendFrom(const std::map<std::string, MonthCount>& months,
                                  const std::string& period, int trend_months) {
  std::vector<TrendPoint> points;
  for (auto it = months.rbegin(); it != months.rend(); ++it) {
    if (it->first > period || it->second.n == 0) continue;
    if (static_cast<int>(points.size()) >= trend_months) break;
    TrendPoint p;
    p.month = it->first;
    p.n = it->second.n;
    p.nonconforming = it->second.defects;
    p.rate = static_cast<double>(p.nonconforming) / static_cast<double>(p.n);
    points.push_back(p);
  }
  std::reverse(points.begin(), points.end());
  int64_t n = 0, defects = 0;
  for (const TrendPoint& p : points) n += p.n, defects += p.nonconforming;
  const double p_bar = n > 0 ? static_cast<double>(defects) / static_cast<double>(n) : 0.0;
  for (TrendPoint& p : points) {
    p.limits = PChart(p_bar, p.n);
    p.out_of_control = p.rate < p.limits.lower - 1e-12 || p.rate > p.limits.upper + 1e-12;
  }
  return points;
}

std::string UtcNow() {
  std::time_t t = std::time(nullptr);
  std::tm tm{};
  gmtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%d %H:%M UTC", &tm);
  return buf;
}

}  // namespace

std::optional<double> ReportFigures::PercentAssessable() const { return Percent(assessable, images); }
std::optional<double> ReportFigures::PercentAllBordersVisible() const {
  return Percent(all_borders_visible, with_field);
}
std::optional<double> ReportFigures::PercentNeedsReview() const {
  return Percent(needs_review, assessable);
}

Status ReportOptions::Validate() const {
  static const std::regex kMonth(R"(\d{4}-(0[1-9]|1[0-2]))");
  if (!std::regex_match(period, kMonth)) {
    return MakeError(ErrorKind::kInvalidInput, "", "period must be YYYY-MM, got '" + period + "'",
                     "--period");
  }
  if (worst_cases < 0 || worst_cases > 60 || cases_per_sheet < 0 || cases_per_sheet > 12 ||
      trend_months < 1 || trend_months > 120) {
    return MakeError(ErrorKind::kInvalidInput, "", "case or month counts out of range");
  }
  return Status::Ok();
}

struct ReportBuilder::State {
  ReportOptions options;
  int64_t records_seen = 0;
  Tally department;
  std::map<std::string, Tally> rooms, exams, people;
  std::array<int64_t, 20> histogram{};
  std::map<std::string, MonthCount> months;
  std::map<std::string, std::map<std::string, MonthCount>> person_months;
  WorstCases worst;
  std::map<std::string, WorstCases> person_worst;
  std::map<std::string, std::string> labels;  // operator name -> label, computed once

  const std::string& Label(const std::string& name) {
    auto it = labels.find(name);
    if (it != labels.end()) return it->second;
    std::string label = options.staff_label ? options.staff_label(name)
                                            : (name.empty() ? "(not recorded)" : name);
    return labels.emplace(name, std::move(label)).first->second;
  }
};

ReportBuilder::ReportBuilder(ReportOptions options) : state_(std::make_unique<State>()) {
  state_->options = std::move(options);
  state_->worst.keep = static_cast<size_t>(std::max(0, state_->options.worst_cases));
}
ReportBuilder::~ReportBuilder() = default;
ReportBuilder::ReportBuilder(ReportBuilder&&) noexcept = default;
ReportBuilder& ReportBuilder::operator=(ReportBuilder&&) noexcept = default;

void ReportBuilder::Add(const ImageRecord& r) {
  State& s = *state_;
  ++s.records_seen;
  if (r.status != RecordStatus::kOk) return;
  const ExtractedColumns c = ExtractColumns(r);
  const std::string& who = s.Label(r.context.operator_name);
  if (c.assessable && r.context.month <= s.options.period) {
    MonthCount& m = s.months[r.context.month];
    MonthCount& pm = s.person_months[who][r.context.month];
    const bool defect = c.outcome == "needs review";
    ++m.n, ++pm.n;
    m.defects += defect, pm.defects += defect;
  }
  if (r.context.month != s.options.period) return;
  s.department.Add(r, c);
  s.rooms[r.context.station.empty() ? "(no station name)" : r.context.station].Add(r, c);
  s.exams[ExamLabel(r.context)].Add(r, c);
  s.people[who].Add(r, c);
  if (!c.assessable || !c.excess_fraction) return;
  const double excess = *c.excess_fraction;
  ++s.histogram[std::clamp(static_cast<int>(excess * 20.0), 0, 19)];
  WorstCases& mine = s.person_worst[who];
  mine.keep = static_cast<size_t>(std::max(0, s.options.cases_per_sheet));
  if (!s.worst.Wants(excess) && !mine.Wants(excess)) return;
  CaseSummary cs;
  cs.case_id = CaseIdFor(r);
  cs.radiographer = who;
  cs.room = r.context.station;
  cs.exam = ExamLabel(r.context);
  cs.month = r.context.month;
  cs.excess_fraction = excess;
  cs.avoidable_kap_dgy_cm2 = c.avoidable_kap_dgy_cm2;
  cs.outcome = c.outcome;
  for (Side side : kAllSides) cs.sides[static_cast<int>(side)] = ClassifySide(r, side);
  cs.source_file = r.file;
  cs.record = r;
  if (s.worst.Wants(excess)) s.worst.Offer(cs);
  if (mine.Wants(excess)) mine.Offer(std::move(cs));
}

ReportModel ReportBuilder::Finish() {
  State& s = *state_;
  ReportModel m;
  m.period = s.options.period;
  m.generated_utc = UtcNow();
  m.software_version = kVersion;
  m.pseudonymised = s.options.pseudonymised;
  m.records_seen = s.records_seen;
  m.department = s.department.Done();
  for (const auto& [label, tally] : s.rooms) m.rooms.push_back({label, tally.Done()});
  for (const auto& [label, tally] : s.exams) m.exams.push_back({label, tally.Done()});
  for (const auto& [label, tally] : s.people) m.radiographers.push_back({label, tally.Done()});
  m.excess_histogram = s.histogram;
  m.trend = TrendFrom(s.months, s.options.period, s.options.trend_months);
  m.worst = s.worst.Sorted();
  for (const GroupFigures& g : m.radiographers) {
    RadiographerSheet sheet;
    sheet.label = g.label;
    sheet.figures = g.figures;
    sheet.trend = TrendFrom(s.person_months[g.label], s.options.period, s.options.trend_months);
    auto it = s.person_worst.find(g.label);
    if (it != s.person_worst.end()) sheet.cases = it->second.Sorted();
    sheet.tips = report_internal::FeedbackTips(sheet.figures, m.department);
    m.sheets.push_back(std::move(sheet));
  }
  return m;
}

}  // namespace beamtrim
