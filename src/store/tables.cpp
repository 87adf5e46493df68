// Audit tables and trends: one streaming pass over the store, aggregation per group.
#include "beamtrim/tables.h"

#include <algorithm>
#include <cmath>
#include <map>

#include "store/tables_internal.h"

namespace beamtrim {
namespace {

constexpr const char* kUnknown = "(unknown)";

std::string OrUnknown(const std::string& value) { return value.empty() ? kUnknown : value; }

// Accepts YYYY-MM-DD or YYYYMMDD; returns YYYYMMDD, or empty on a malformed date.
std::string NormaliseDate(const std::string& text) {
  std::string digits;
  for (char c : text) {
    if (c != '-') digits += c;
  }
  bool ok = digits.size() == 8 && std::all_of(digits.begin(), digits.end(), ::isdigit) &&
            (text.size() == 8 || (text.size() == 10 && text[4] == '-' && text[7] == '-'));
  if (!ok) return {};
  int month = std::stoi(digits.substr(4, 2)), day = std::stoi(digits.substr(6, 2));
  if (month < 1 || month > 12 || day < 1 || day > 31) return {};
  return digits;
}

// Everything a group needs; the excess fractions are kept to take quantiles at the end.
struct Accumulator {
  int64_t images = 0, assessable = 0, borders = 0, review = 0, clipped = 0, blanked = 0;
  double area = 0, area_patient = 0, kap = 0, avoidable = 0;
  std::vector<double> fractions;

  void Add(const ExtractedColumns& v) {
    ++images;
    borders += v.all_borders_visible;
    blanked += v.blanked_or_cropped;
    if (v.kap_dgy_cm2) kap += *v.kap_dgy_cm2;
    if (v.avoidable_kap_dgy_cm2) avoidable += *v.avoidable_kap_dgy_cm2;
    if (!v.assessable) return;
    ++assessable;
    review += v.outcome == "needs review";
    clipped += v.anatomy_clipped;
    if (v.excess_fraction) fractions.push_back(*v.excess_fraction);
    if (v.excess_area_mm2) area += *v.excess_area_mm2 / 100.0;
    if (v.excess_area_patient_mm2) area_patient += *v.excess_area_patient_mm2 / 100.0;
  }
};

std::optional<double> Percent(int64_t part, int64_t whole) {
  if (whole <= 0) return std::nullopt;
  return 100.0 * static_cast<double>(part) / static_cast<double>(whole);
}

GroupStats Finish(std::vector<std::string> keys, Accumulator& a, int64_t min_n) {
  GroupStats s;
  s.keys = std::move(keys);
  s.images = a.images;
  s.assessable = a.assessable;
  s.with_excess = static_cast<int64_t>(a.fractions.size());
  if (!a.fractions.empty()) {
    std::sort(a.fractions.begin(), a.fractions.end());
    s.excess_median = Quantile(a.fractions, 0.5);
    s.excess_q1 = Quantile(a.fractions, 0.25);
    s.excess_q3 = Quantile(a.fractions, 0.75);
  }
  s.pct_all_borders_visible = Percent(a.borders, a.images);
  s.pct_blanked_or_cropped = Percent(a.blanked, a.images);
  s.pct_needs_review = Percent(a.review, a.assessable);
  s.pct_anatomy_clipped = Percent(a.clipped, a.assessable);
  s.excess_area_cm2 = a.area;
  s.excess_area_patient_cm2 = a.area_patient;
  s.kap_dgy_cm2 = a.kap;
  s.avoidable_kap_dgy_cm2 = a.avoidable;
  s.small_group = a.assessable < min_n;
  return s;
}

std::string TableName(const std::vector<GroupKey>& keys) {
  if (keys.empty()) return "overall";
  std::string name = "by";
  for (GroupKey k : keys) name += std::string("-") + GroupKeyName(k);
  return name;
}

// Turns operator names into codes once, so every table and the trend agree.
class KeyMaker {
 public:
  explicit KeyMaker(std::optional<std::array<uint8_t, 32>> key) : key_(key) {}
  std::string Key(GroupKey k, const StoredRow& row) {
    switch (k) {
      case GroupKey::kOperator:
        if (!key_) return OrUnknown(row.operator_name);
        return row.operator_name.empty() ? kUnknown : StaffPseudonym(*key_, row.operator_name);
      case GroupKey::kStation: return OrUnknown(row.station);
      case GroupKey::kExam:
        return OrUnknown(row.body_part) + " " + OrUnknown(row.view);
      case GroupKey::kMonth: return OrUnknown(row.month);
    }
    return kUnknown;
  }

 private:
  std::optional<std::array<uint8_t, 32>> key_;
};

struct TrendCell {
  int64_t n = 0, nonconforming = 0;
};
using TrendMap = std::map<std::pair<std::string, std::string>, TrendCell>;  // (group, month)

std::vector<TrendSeries> MakeSeries(GroupKey by, const TrendMap& cells) {
  std::vector<TrendSeries> out;
  for (auto it = cells.begin(); it != cells.end();) {
    TrendSeries series;
    series.by = by;
    series.group = it->first.first;
    int64_t total_n = 0, total_bad = 0;
    auto end = it;
    for (; end != cells.end() && end->first.first == series.group; ++end) {
      total_n += end->second.n;
      total_bad += end->second.nonconforming;
    }
    series.centre = total_n > 0 ? static_cast<double>(total_bad) / total_n : 0.0;
    for (; it != end; ++it) {
      if (it->second.n == 0) continue;
      TrendPoint p;
      p.month = it->first.second;
      p.n = it->second.n;
      p.nonconforming = it->second.nonconforming;
      p.rate = static_cast<double>(p.nonconforming) / p.n;
      p.limits = PChart(series.centre, p.n);
      p.out_of_control = p.rate > p.limits.upper || p.rate < p.limits.lower;
      series.points.push_back(p);
    }
    if (!series.points.empty()) out.push_back(std::move(series));
  }
  return out;
}

Result<std::optional<std::array<uint8_t, 32>>> PseudonymKey(const TableOptions& options) {
  if (!options.pseudonymise) return std::optional<std::array<uint8_t, 32>>();
  auto key = LoadOrCreateKey(options.key_file);
  if (!key) return key.error();
  return std::optional<std::array<uint8_t, 32>>(*key);
}

}  // namespace

const char* GroupKeyName(GroupKey key) {
  switch (key) {
    case GroupKey::kOperator: return "operator";
    case GroupKey::kStation: return "station";
    case GroupKey::kExam: return "exam";
    case GroupKey::kMonth: return "month";
  }
  return "operator";
}

Result<GroupKey> ParseGroupKey(const std::string& name) {
  for (GroupKey k : {GroupKey::kOperator, GroupKey::kStation, GroupKey::kExam, GroupKey::kMonth}) {
    if (name == GroupKeyName(k)) return k;
  }
  return MakeError(ErrorKind::kInvalidInput, "",
                   "unknown grouping '" + name + "' (use operator, station, exam or month)",
                   "--by");
}

Result<TableFormat> ParseTableFormat(const std::string& name) {
  if (name == "csv") return TableFormat::kCsv;
  if (name == "json") return TableFormat::kJson;
  if (name == "xlsx") return TableFormat::kXlsx;
  return MakeError(ErrorKind::kInvalidInput, "",
                   "unknown format '" + name + "' (use csv, json or xlsx)", "--format");
}

Status TableOptions::Validate() const {
  for (const auto& [text, option] : {std::pair{from_date, "--from"}, std::pair{to_date, "--to"}}) {
    if (!text.empty() && NormaliseDate(text).empty()) {
      return MakeError(ErrorKind::kInvalidInput, "",
                       "'" + text + "' is not a date (use YYYY-MM-DD)", option);
    }
  }
  if (!from_date.empty() && !to_date.empty() && NormaliseDate(from_date) > NormaliseDate(to_date)) {
    return MakeError(ErrorKind::kInvalidInput, "", "--from is after --to", "--from");
  }
  if (min_n < 1) return MakeError(ErrorKind::kInvalidInput, "", "must be at least 1", "--min-n");
  if (pseudonymise && key_file.empty()) {
    return MakeError(ErrorKind::kInvalidInput, "", "required with --pseudonymise", "--key-file");
  }
  return Status::Ok();
}

double Quantile(const std::vector<double>& sorted, double p) {
  // Hyndman & Fan (1996), definition 7: h = (n - 1) p, interpolate between x[floor h] and
  // the next order statistic (0-based).
  double h = (static_cast<double>(sorted.size()) - 1.0) * p;
  auto lo = static_cast<size_t>(std::floor(h));
  size_t hi = std::min(lo + 1, sorted.size() - 1);
  return sorted[lo] + (h - static_cast<double>(lo)) * (sorted[hi] - sorted[lo]);
}

PChartLimits PChart(double p_bar, int64_t n) {
  PChartLimits limits;
  limits.centre = p_bar;
  double sigma = n > 0 ? std::sqrt(p_bar * (1.0 - p_bar) / static_cast<double>(n)) : 0.0;
  limits.lower = std::clamp(p_bar - 3.0 * sigma, 0.0, 1.0);
  limits.upper = std::clamp(p_bar + 3.0 * sigma, 0.0, 1.0);
  return limits;
}

Result<AuditTables> BuildAuditTables(const Store& store, const TableOptions& options) {
  if (Status s = options.Validate(); !s) return s.error();
  auto key = PseudonymKey(options);
  if (!key) return key.error();
  KeyMaker keys(*key);

  std::vector<std::vector<GroupKey>> layouts = options.tables;
  if (layouts.empty()) {
    layouts = {{}, {GroupKey::kOperator}, {GroupKey::kStation}, {GroupKey::kExam},
               {GroupKey::kMonth}};
  }
  std::vector<std::map<std::vector<std::string>, Accumulator>> groups(layouts.size());
  TrendMap by_operator, by_station;
  std::map<std::string, store_internal::RoomClinical> rooms;

  AuditTables result;
  result.from_date = NormaliseDate(options.from_date);
  result.to_date = NormaliseDate(options.to_date);
  result.min_n = options.min_n;
  result.pseudonymised = options.pseudonymise;
  Status read = store.ForEachRow(result.from_date, result.to_date, [&](const StoredRow& row) {
    for (size_t t = 0; t < layouts.size(); ++t) {
      std::vector<std::string> group;
      for (GroupKey k : layouts[t]) group.push_back(keys.Key(k, row));
      groups[t][group].Add(row.values);
    }
    rooms[store_internal::RoomLabel(row.station)].Add(row.values);
    if (row.values.assessable) {
      std::string month = keys.Key(GroupKey::kMonth, row);
      for (auto [by, map] : {std::pair{GroupKey::kOperator, &by_operator},
                             std::pair{GroupKey::kStation, &by_station}}) {
        TrendCell& cell = (*map)[{keys.Key(by, row), month}];
        ++cell.n;
        cell.nonconforming += row.values.outcome == "needs review";
      }
    }
    return true;
  });
  if (!read) return read.error();

  for (size_t t = 0; t < layouts.size(); ++t) {
    AuditTable table;
    table.name = TableName(layouts[t]);
    table.keys = layouts[t];
    for (auto& [group, acc] : groups[t]) table.rows.push_back(Finish(group, acc, options.min_n));
    if (layouts[t].empty() && table.rows.empty()) {
      Accumulator empty;
      table.rows.push_back(Finish({}, empty, options.min_n));
    }
    result.tables.push_back(std::move(table));
  }
  auto qc = store_internal::JoinRoomQc(store, rooms, result.to_date);
  if (!qc) return qc.error();
  result.qc = std::move(*qc);
  result.trend = MakeSeries(GroupKey::kOperator, by_operator);
  for (TrendSeries& s : MakeSeries(GroupKey::kStation, by_station)) {
    result.trend.push_back(std::move(s));
  }
  return result;
}

Result<std::vector<TrendSeries>> BuildTrend(const Store& store, GroupKey by,
                                            const TableOptions& options) {
  if (by != GroupKey::kOperator && by != GroupKey::kStation) {
    return MakeError(ErrorKind::kInvalidInput, "", "trends are per operator or per station",
                     "--by");
  }
  TableOptions only_trend = options;
  only_trend.tables = {{}};
  auto all = BuildAuditTables(store, only_trend);
  if (!all) return all.error();
  std::vector<TrendSeries> out;
  for (TrendSeries& s : all->trend) {
    if (s.by == by) out.push_back(std::move(s));
  }
  return out;
}

}  // namespace beamtrim
