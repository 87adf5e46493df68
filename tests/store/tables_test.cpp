// Audit tables: group arithmetic against independent computations, p-chart limits against the
// textbook formula, and the CSV / JSON / XLSX outputs read back.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <iterator>
#include <map>
#include <random>

#include <nlohmann/json.hpp>

#include "beamtrim/tables.h"
#include "store_fixtures.h"

using namespace beamtrim;
using namespace beamtrim::testing;

namespace {

std::unique_ptr<Store> OpenOrFail(const std::filesystem::path& file) {
  auto store = Store::Open(file);
  REQUIRE_MESSAGE(store.ok(), (store.ok() ? "" : store.error().ToString()));
  return std::move(store.value());
}

void Put(Store& store, const RecordSpec& spec, int index) {
  std::string path = "/synthetic/" + std::to_string(index) + ".dcm";
  auto outcome = store.Put(MakeImage(spec, path), FileIdentity{path, 1, 1});
  REQUIRE(outcome.ok());
}

// RFC 4180 parser, written for this test: fields separated by commas, records by CRLF (LF
// accepted), fields optionally in double quotes with "" for a quote inside.
std::vector<std::vector<std::string>> ParseCsv(const std::string& text) {
  std::vector<std::vector<std::string>> records(1);
  std::string field;
  bool quoted = false, was_quoted = false;
  for (size_t i = 0; i < text.size(); ++i) {
    char c = text[i];
    if (quoted) {
      if (c == '"' && i + 1 < text.size() && text[i + 1] == '"') {
        field += '"';
        ++i;
      } else if (c == '"') {
        quoted = false;
      } else {
        field += c;
      }
    } else if (c == '"' && field.empty() && !was_quoted) {
      quoted = was_quoted = true;
    } else if (c == ',') {
      records.back().push_back(field);
      field.clear();
      was_quoted = false;
    } else if (c == '\r' || c == '\n') {
      if (c == '\r' && i + 1 < text.size() && text[i + 1] == '\n') ++i;
      records.back().push_back(field);
      field.clear();
      was_quoted = false;
      records.emplace_back();
    } else {
      field += c;
    }
  }
  if (!field.empty() || !records.back().empty()) records.back().push_back(field);
  if (records.back().empty()) records.pop_back();
  return records;
}

std::string ReadAll(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

std::string Unzip(const std::filesystem::path& zip, const std::string& member) {
  std::string command = "unzip -p '" + zip.string() + "' '" + member + "' 2>/dev/null";
  std::string out;
  FILE* pipe = ::popen(command.c_str(), "r");
  REQUIRE(pipe != nullptr);
  char buffer[4096];
  for (size_t n; (n = std::fread(buffer, 1, sizeof buffer, pipe)) > 0;) out.append(buffer, n);
  ::pclose(pipe);
  return out;
}

const GroupStats& Row(const AuditTable& table, const std::string& key) {
  for (const GroupStats& s : table.rows) {
    if (!s.keys.empty() && s.keys[0] == key) return s;
  }
  FAIL("no row " << key);
  return table.rows.front();
}

// Synthetic ground truth: a fictional month with three radiographers in two rooms.
std::vector<RecordSpec> SyntheticMonth() {
  std::mt19937 random(7);
  std::vector<RecordSpec> specs;
  const char* outcomes[] = {"acceptable", "needs review", "not assessable"};
  for (int i = 0; i < 90; ++i) {
    RecordSpec s;
    s.sop = "1.2.826.0.1.3680043.9.7777.5." + std::to_string(i);
    s.operator_name = "RT-0" + std::to_string(1 + i % 3);
    s.station = i % 2 ? "ROOM-1" : "ROOM-2";
    s.study_date = "202603" + std::string(i % 28 < 9 ? "0" : "") + std::to_string(1 + i % 28);
    s.outcome = outcomes[random() % 3];
    s.all_visible = random() % 4 != 0;
    s.clipped = random() % 5 == 0;
    s.blanked = s.outcome == "not assessable" && random() % 2 == 0;
    s.excess_fraction = (random() % 1000) / 1000.0;
    if (i % 11 == 0) s.excess_fraction.reset();
    s.excess_area_mm2 = 100.0 * (random() % 500);
    s.excess_area_patient_mm2 = *s.excess_area_mm2 / 1.21;
    s.kap = (random() % 300) / 100.0;
    if (i % 7 == 0) s.kap.reset();
    s.avoidable_kap = s.kap ? std::optional<double>(*s.kap * 0.3) : std::nullopt;
    specs.push_back(s);
  }
  return specs;
}

}  // namespace

TEST_CASE("QuantilesFollowHyndmanFanDefinitionSeven") {
  // Worked example: R `quantile(1:10)` (type 7, the default) gives 3.25, 5.5, 7.75.
  std::vector<double> x = {1, 2, 3, 4, 5, 6, 7, 8, 9, 10};
  CHECK(Quantile(x, 0.25) == doctest::Approx(3.25));
  CHECK(Quantile(x, 0.5) == doctest::Approx(5.5));
  CHECK(Quantile(x, 0.75) == doctest::Approx(7.75));
  // Excel PERCENTILE.INC({1,2,3,4}, 0.25) = 1.75 (same definition, 1-based rank p(n-1)+1).
  CHECK(Quantile({1, 2, 3, 4}, 0.25) == doctest::Approx(1.75));
  CHECK(Quantile({42}, 0.75) == doctest::Approx(42));
  CHECK(Quantile({0, 10}, 1.0) == doctest::Approx(10));
}

TEST_CASE("PChartLimitsFollowTheTextbookFormula") {
  // Montgomery, Introduction to Statistical Quality Control, p chart: p̄ ± 3 sqrt(p̄(1-p̄)/n).
  // Worked: p̄ = 0.2, n = 100 -> sigma = sqrt(0.16 / 100) = 0.04 -> limits 0.08 and 0.32.
  PChartLimits l = PChart(0.2, 100);
  CHECK(l.centre == doctest::Approx(0.2));
  CHECK(l.lower == doctest::Approx(0.08));
  CHECK(l.upper == doctest::Approx(0.32));
  // n = 4: sigma = 0.2, the lower limit 0.2 - 0.6 is clipped to 0.
  l = PChart(0.2, 4);
  CHECK(l.lower == 0.0);
  CHECK(l.upper == doctest::Approx(0.8));
  // n = 1, p̄ = 0.5: 0.5 ± 1.5 clipped to [0, 1].
  l = PChart(0.5, 1);
  CHECK(l.lower == 0.0);
  CHECK(l.upper == 1.0);
}

TEST_CASE("TrendFlagsTheMonthOutsideItsPChartLimits") {
  TempDir dir;
  auto store = OpenOrFail(dir / "s.db");
  // RT-07, 50 assessable images a month: 10, 5 and 25 need review (synthetic ground truth).
  int index = 0;
  const std::pair<const char*, int> months[] = {{"20260110", 10}, {"20260210", 5}, {"20260310", 25}};
  for (auto [date, bad] : months) {
    for (int i = 0; i < 50; ++i) {
      RecordSpec s;
      s.sop = "1.2.3.9." + std::to_string(index);
      s.study_date = date;
      s.outcome = i < bad ? "needs review" : "acceptable";
      Put(*store, s, index++);
    }
  }
  auto trend = BuildTrend(*store, GroupKey::kOperator, {});
  REQUIRE(trend.ok());
  REQUIRE(trend->size() == 1);
  const TrendSeries& s = trend->front();
  // p̄ = 40 / 150; sigma = sqrt(p̄ (1 - p̄) / 50) = 0.062537...; limits 0.0791 and 0.4543.
  double p_bar = 40.0 / 150.0;
  double sigma = std::sqrt(p_bar * (1 - p_bar) / 50.0);
  CHECK(s.centre == doctest::Approx(p_bar));
  REQUIRE(s.points.size() == 3);
  CHECK(s.points[0].month == "2026-01");
  CHECK(s.points[2].limits.upper == doctest::Approx(p_bar + 3 * sigma));
  CHECK(s.points[2].limits.upper == doctest::Approx(0.4543).epsilon(1e-3));
  CHECK(s.points[2].limits.lower == doctest::Approx(0.0791).epsilon(1e-3));
  CHECK_FALSE(s.points[0].out_of_control);  // 0.20
  CHECK_FALSE(s.points[1].out_of_control);  // 0.10 > 0.079
  CHECK(s.points[2].out_of_control);        // 0.50 > 0.454
  auto rooms = BuildTrend(*store, GroupKey::kStation, {});
  REQUIRE(rooms.ok());
  CHECK(rooms->front().group == "ROOM-2");
}

TEST_CASE("GroupFiguresMatchAnIndependentComputation") {
  TempDir dir;
  auto store = OpenOrFail(dir / "s.db");
  std::vector<RecordSpec> specs = SyntheticMonth();
  for (size_t i = 0; i < specs.size(); ++i) Put(*store, specs[i], static_cast<int>(i));
  RecordSpec failed;
  failed.sop = "";
  failed.status = RecordStatus::kError;  // never counted in the tables
  Put(*store, failed, 1000);

  TableOptions options;
  options.tables = {{GroupKey::kOperator}};
  options.min_n = 25;
  auto tables = BuildAuditTables(*store, options);
  REQUIRE(tables.ok());
  const AuditTable& table = tables->tables.front();
  CHECK(table.name == "by-operator");
  REQUIRE(table.rows.size() == 3);
  for (const char* op : {"RT-01", "RT-02", "RT-03"}) {
    // Independent computation straight from the specs: counts, then the median as the middle
    // element (or mean of the two middle elements) of a sorted copy, quartiles by the 1-based
    // rank p(n-1)+1 with interpolation.
    int images = 0, assessable = 0, visible = 0, review = 0, clipped = 0, blanked = 0;
    double area = 0, kap = 0;
    std::vector<double> fractions;
    for (const RecordSpec& s : specs) {
      if (s.operator_name != op) continue;
      ++images;
      visible += s.all_visible;
      blanked += s.blanked;
      if (s.kap) kap += *s.kap;
      if (s.outcome == "not assessable") continue;
      ++assessable;
      review += s.outcome == "needs review";
      clipped += s.clipped;
      area += *s.excess_area_mm2 / 100.0;
      if (s.excess_fraction) fractions.push_back(*s.excess_fraction);
    }
    std::sort(fractions.begin(), fractions.end());
    size_t n = fractions.size();
    double median = n % 2 ? fractions[n / 2] : (fractions[n / 2 - 1] + fractions[n / 2]) / 2;
    auto rank = [&](double p) {
      double r = p * (n - 1) + 1;  // 1-based
      size_t k = static_cast<size_t>(r);
      return k >= n ? fractions[n - 1] : fractions[k - 1] + (r - k) * (fractions[k] - fractions[k - 1]);
    };
    const GroupStats& row = Row(table, op);
    CAPTURE(op);
    CHECK(row.images == images);
    CHECK(row.assessable == assessable);
    CHECK(row.with_excess == static_cast<int64_t>(n));
    CHECK(*row.excess_median == doctest::Approx(median));
    CHECK(*row.excess_q1 == doctest::Approx(rank(0.25)));
    CHECK(*row.excess_q3 == doctest::Approx(rank(0.75)));
    CHECK(*row.pct_all_borders_visible == doctest::Approx(100.0 * visible / images));
    CHECK(*row.pct_needs_review == doctest::Approx(100.0 * review / assessable));
    CHECK(*row.pct_anatomy_clipped == doctest::Approx(100.0 * clipped / assessable));
    CHECK(*row.pct_blanked_or_cropped == doctest::Approx(100.0 * blanked / images));
    CHECK(row.excess_area_cm2 == doctest::Approx(area));
    CHECK(row.excess_area_patient_cm2 == doctest::Approx(area / 1.21));
    CHECK(row.kap_dgy_cm2 == doctest::Approx(kap));
    CHECK(row.avoidable_kap_dgy_cm2 == doctest::Approx(kap * 0.3));
    CHECK(row.small_group == (assessable < 25));
  }
}

TEST_CASE("DateRangeIsInclusiveAndExamGroupsBodyPartWithView") {
  TempDir dir;
  auto store = OpenOrFail(dir / "s.db");
  const char* dates[] = {"20260228", "20260301", "20260315", "20260331", "20260401"};
  for (int i = 0; i < 5; ++i) {
    RecordSpec s;
    s.sop = "1.2.3.4." + std::to_string(i);
    s.study_date = dates[i];
    s.view = i % 2 ? "LAT" : "PA";
    Put(*store, s, i);
  }
  TableOptions options;
  options.tables = {{GroupKey::kExam}};
  options.from_date = "2026-03-01";
  options.to_date = "2026-03-31";
  auto tables = BuildAuditTables(*store, options);
  REQUIRE(tables.ok());
  const AuditTable& t = tables->tables.front();
  REQUIRE(t.rows.size() == 2);
  CHECK(Row(t, "CHEST LAT").images == 2);  // 0301 and 0331
  CHECK(Row(t, "CHEST PA").images == 1);   // 0315

  options.from_date = "2026-3-1";
  auto bad = BuildAuditTables(*store, options);
  REQUIRE_FALSE(bad.ok());
  CHECK(bad.error().attribute == "--from");
}

TEST_CASE("CsvTablesReadBackWithCautionUnitsAndQuotedNames") {
  TempDir dir;
  auto store = OpenOrFail(dir / "s.db");
  RecordSpec s;
  s.operator_name = "RT-07, \"night\"";  // needs RFC 4180 quoting
  Put(*store, s, 1);
  TableOptions options;
  options.tables = {{GroupKey::kOperator}};
  auto tables = BuildAuditTables(*store, options);
  REQUIRE(tables.ok());
  REQUIRE(WriteAuditTables(*tables, TableFormat::kCsv, dir / "csv").ok());
  auto records = ParseCsv(ReadAll(dir / "csv" / "by-operator.csv"));
  REQUIRE(records.size() == 3);
  CHECK(records[0] == std::vector<std::string>{kTablesCaution});
  const auto& header = records[1];
  const auto& row = records[2];
  REQUIRE(header.size() == row.size());
  std::map<std::string, std::string> cells;
  for (size_t i = 0; i < header.size(); ++i) cells[header[i]] = row[i];
  CHECK(cells["radiographer (Operators' Name)"] == "RT-07, \"night\"");
  CHECK(cells["images (n)"] == "1");
  CHECK(std::stod(cells["excess fraction, median (0 mm margin, of field area)"]) ==
        doctest::Approx(0.2));
  CHECK(std::stod(cells["excess area at the detector (cm2, total)"]) == doctest::Approx(100.0));
  CHECK(cells["fewer than 20 assessable images: rates unreliable"] == "yes");
  auto trend = ParseCsv(ReadAll(dir / "csv" / "trend.csv"));
  REQUIRE(trend.size() == 4);  // caution, header, one radiographer-month, one room-month
  CHECK(trend[2][0] == "radiographer");
  CHECK(trend[3][0] == "room");
}

TEST_CASE("XlsxHasOneSheetPerTableWithCautionAndUnits") {
  TempDir dir;
  auto store = OpenOrFail(dir / "s.db");
  for (int i = 0; i < 3; ++i) {
    RecordSpec s;
    s.sop = "1.2.3.5." + std::to_string(i);
    Put(*store, s, i);
  }
  auto tables = BuildAuditTables(*store, {});
  REQUIRE(tables.ok());
  REQUIRE(WriteAuditTables(*tables, TableFormat::kXlsx, dir / "t.xlsx").ok());
  std::string workbook = Unzip(dir / "t.xlsx", "xl/workbook.xml");
  for (const char* name : {"overall", "by-operator", "by-station", "by-exam", "by-month", "trend"}) {
    CHECK(workbook.find(std::string("name=\"") + name + "\"") != std::string::npos);
  }
  std::string strings = Unzip(dir / "t.xlsx", "xl/sharedStrings.xml");
  CHECK(strings.find("Caution: dose figures are estimates") != std::string::npos);
  CHECK(strings.find("excess area at the patient plane (cm2, total)") != std::string::npos);
  CHECK(strings.find("RT-07") != std::string::npos);
  // The overall sheet: the image count 3 as a number in the first data row (row 4, column A).
  std::string sheet1 = Unzip(dir / "t.xlsx", "xl/worksheets/sheet1.xml");
  size_t start = sheet1.find("<c r=\"A4\"");
  REQUIRE(start != std::string::npos);
  std::string cell = sheet1.substr(start, sheet1.find("</c>", start) - start);
  CHECK(cell.find("<v>3</v>") != std::string::npos);
  CHECK(cell.find("t=\"s\"") == std::string::npos);  // a number, not a shared string
}

TEST_CASE("JsonTablesCarryCautionAndTypedValues") {
  TempDir dir;
  auto store = OpenOrFail(dir / "s.db");
  Put(*store, RecordSpec{}, 1);
  auto tables = BuildAuditTables(*store, {});
  REQUIRE(tables.ok());
  REQUIRE(WriteAuditTables(*tables, TableFormat::kJson, dir / "t.json").ok());
  auto doc = nlohmann::json::parse(ReadAll(dir / "t.json"));
  CHECK(doc["schema"] == "beamtrim.audit-tables");
  CHECK(doc["caution"] == kTablesCaution);
  CHECK(doc["tables"][0]["name"] == "overall");
  CHECK(doc["tables"][0]["rows"][0]["images"] == 1);
  CHECK(doc["tables"][0]["rows"][0]["small_group"] == true);
  CHECK(doc["tables"][0]["rows"][0]["excess_fraction_median"].get<double>() ==
        doctest::Approx(0.2));
}

TEST_CASE("PseudonymisedTablesNameNoRadiographer") {
  TempDir dir;
  auto store = OpenOrFail(dir / "s.db");
  Put(*store, RecordSpec{}, 1);
  TableOptions options;
  options.pseudonymise = true;
  options.key_file = dir / "manager.key";
  auto tables = BuildAuditTables(*store, options);
  REQUIRE(tables.ok());
  REQUIRE(WriteAuditTables(*tables, TableFormat::kCsv, dir / "csv").ok());
  auto key = LoadOrCreateKey(dir / "manager.key");
  REQUIRE(key.ok());
  std::string code = StaffPseudonym(*key, "RT-07");
  for (const auto& entry : std::filesystem::directory_iterator(dir / "csv")) {
    std::string text = ReadAll(entry.path());
    CHECK(text.find("RT-07") == std::string::npos);
  }
  CHECK(ReadAll(dir / "csv" / "by-operator.csv").find(code) != std::string::npos);
  CHECK(ReadAll(dir / "csv" / "trend.csv").find(code) != std::string::npos);

  TableOptions missing_key;
  missing_key.pseudonymise = true;
  auto refused = BuildAuditTables(*store, missing_key);
  REQUIRE_FALSE(refused.ok());
  CHECK(refused.error().attribute == "--key-file");
}
