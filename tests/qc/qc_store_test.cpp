// QC records in the store and the one-page report.
#include <doctest/doctest.h>

#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <iterator>

#include <sqlite3.h>
#include <nlohmann/json.hpp>

#include "beamtrim/qc.h"
#include "beamtrim/report.h"
#include "beamtrim/store.h"
#include "beamtrim/synth_qc.h"
#include "beamtrim/tables.h"
#include "report/fixtures.h"

using namespace beamtrim;

namespace {

std::filesystem::path TempDir(const std::string& name) {
  auto dir = std::filesystem::temp_directory_path() / ("beamtrim_qc_" + name + "_" + std::to_string(::getpid()));
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  return dir;
}

struct Analysed {
  QcExposure exposure;
  QcResult result;
};

Analysed Analyse(const std::string& room, const std::string& date, std::array<double, 4> offsets) {
  QcExposureSpec spec;
  spec.width = 700;
  spec.height = 800;
  spec.pixel_mm = 0.35;
  spec.xray_mm = {90.0, 90.0, 100.0, 100.0};
  spec.offset_mm = offsets;
  Analysed a{MakeQcExposure(spec), {}};
  QcImageInfo info;
  info.spacing_mm = std::array<double, 2>{spec.pixel_mm, spec.pixel_mm};
  info.linear = true;
  info.sid_mm = 1000.0;
  info.station = room;
  info.date = date;
  auto r = AnalyseQcExposure(a.exposure.image, info, {});
  REQUIRE(r.ok());
  a.result = r.value();
  return a;
}

std::string ReadAll(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

// A clinical image of the fictional clinic in `room` (synthetic ground truth).
void PutClinical(Store& store, const std::string& room, const std::string& date, int index,
                 const std::string& outcome) {
  MeasuredImage image;
  image.record = testing::MakePhantomRecord();
  image.record.sop_instance_uid = "1.2.826.0.1.3680043.10.555." + std::to_string(index);
  image.record.file = "/synthetic/" + std::to_string(index) + ".dcm";
  image.record.context.station = room;
  image.record.context.study_date = date;
  image.record.context.month = date.substr(0, 4) + "-" + date.substr(4, 2);
  image.record.context.operator_name = "RT-07";
  image.record.verdict->outcome = outcome;
  auto put = store.Put(image, FileIdentity{image.record.file, 1, index});
  REQUIRE(put.ok());
}

}  // namespace

TEST_CASE("QcRecordIsStoredAndReadBackPerRoom") {
  auto dir = TempDir("store");
  auto store = dir / "audit.sqlite";
  Analysed a = Analyse("XR-ROOM-2", "20260105", {3.0, -2.0, 1.0, 4.0});
  Analysed b = Analyse("XR-ROOM-5", "20260106", {12.0, 11.0, 0.0, 0.0});
  Analysed c = Analyse("XR-ROOM-2", "20260301", {1.0, 1.0, 1.0, 1.0});
  auto id_a = SaveQcRecord(store, a.result);
  REQUIRE(id_a.ok());
  REQUIRE(SaveQcRecord(store, b.result).ok());
  REQUIRE(SaveQcRecord(store, c.result).ok());

  auto room2 = LoadQcHistory(store, "XR-ROOM-2");
  REQUIRE(room2.ok());
  REQUIRE(room2->size() == 2);
  CHECK((*room2)[0].date == "20260105");  // oldest first
  CHECK((*room2)[1].date == "20260301");
  CHECK((*room2)[0].overall == a.result.overall);
  REQUIRE((*room2)[0].width_sum_mm);
  CHECK(*(*room2)[0].width_sum_mm == doctest::Approx(*a.result.width_axis.value_mm));
  auto json = nlohmann::json::parse((*room2)[0].result_json);
  CHECK(json["schema"] == "beamtrim.qc-field");
  CHECK(json["station"] == "XR-ROOM-2");
  CHECK(json["edges"].size() == 4);

  auto all = LoadQcHistory(store);
  REQUIRE(all.ok());
  CHECK(all->size() == 3);
  CHECK((*all)[1].station == "XR-ROOM-5");
  CHECK((*all)[1].overall == "fail");  // 12 + 11 mm > 20 mm at SID 1000 mm
  std::filesystem::remove_all(dir);
}

TEST_CASE("LoadingHistoryFromAMissingStoreIsAnError") {
  auto dir = TempDir("missing");
  auto r = LoadQcHistory(dir / "nothing.sqlite");
  CHECK_FALSE(r.ok());
  std::filesystem::remove_all(dir);
}

TEST_CASE("QcReportIsSelfContainedAndCarriesTheCaution") {
  Analysed a = Analyse("XR-ROOM-2", "20260105", {3.0, -2.0, 1.0, 4.0});
  std::vector<QcHistoryRow> history(1);
  history[0].station = "XR-ROOM-2";
  history[0].date = "20251201";
  history[0].overall = "pass";
  auto html = RenderQcReportHtml(a.result, a.exposure.image, history);
  REQUIRE(html.ok());
  const std::string& s = html.value();
  CHECK(s.find("data:image/png;base64,") != std::string::npos);
  CHECK(s.find("src=\"http") == std::string::npos);  // nothing fetched from elsewhere
  CHECK(s.find("medical physicist") != std::string::npos);
  CHECK(s.find("Local regulations") != std::string::npos);
  CHECK(s.find("20251201") != std::string::npos);
  CHECK(s.find("left + right misalignment") != std::string::npos);
}

TEST_CASE("QcReportRefusesAnImageOfAnotherSize") {
  Analysed a = Analyse("XR-ROOM-2", "20260105", {0.0, 0.0, 0.0, 0.0});
  Image other(10, 10, 1.0f);
  auto html = RenderQcReportHtml(a.result, other, {});
  CHECK_FALSE(html.ok());
}

TEST_CASE("QcTableIsPartOfTheStoreSchemaAtVersionThree") {
  auto dir = TempDir("schema");
  auto store = dir / "audit.sqlite";
  REQUIRE(SaveQcRecord(store, Analyse("XR-ROOM-2", "20260105", {1.0, 1.0, 1.0, 1.0}).result).ok());
  sqlite3* db = nullptr;
  REQUIRE(sqlite3_open_v2(store.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK);
  sqlite3_stmt* stmt = nullptr;
  REQUIRE(sqlite3_prepare_v2(db,
                             "SELECT (SELECT description FROM schema_version WHERE version = 3), "
                             "(SELECT count(*) FROM qc_field_checks)",
                             -1, &stmt, nullptr) == SQLITE_OK);
  REQUIRE(sqlite3_step(stmt) == SQLITE_ROW);
  std::string description = reinterpret_cast<const char*>(sqlite3_column_text(stmt, 0));
  CHECK(description.find("qc_field_checks") != std::string::npos);
  CHECK(sqlite3_column_int(stmt, 1) == 1);
  sqlite3_finalize(stmt);
  sqlite3_close(db);
  std::filesystem::remove_all(dir);
}

TEST_CASE("TablesAndReportShowEachRoomsQcHistoryBesideItsClinicalAudit") {
  // Synthetic ground truth (invented clinic, exposures with known light-field offsets at SID
  // 1000 mm). Expected verdicts from 21 CFR 1020.31(d): the magnitudes of the two opposite
  // edges of an axis are added and compared with 2 % of SID = 20 mm.
  auto dir = TempDir("history");
  auto file = dir / "audit.sqlite";
  {
    auto store = Store::Open(file);
    REQUIRE(store.ok());
    PutClinical(**store, "XR-ROOM-5", "20261103", 1, "needs review");
    PutClinical(**store, "XR-ROOM-5", "20261110", 2, "acceptable");
    PutClinical(**store, "XR-ROOM-7", "20261112", 3, "acceptable");
  }
  // ROOM-5: 12 + 11 = 23 mm across the width fails, 0 + 0 along the length passes; the worst
  // edge is the left one, 12 mm = 1.2 % of SID. A check after the period must not show.
  REQUIRE(SaveQcRecord(file, Analyse("XR-ROOM-5", "20261020", {12.0, 11.0, 0.0, 0.0}).result).ok());
  REQUIRE(SaveQcRecord(file, Analyse("XR-ROOM-5", "20250601", {2.0, -3.0, 4.0, 1.0}).result).ok());
  REQUIRE(SaveQcRecord(file, Analyse("XR-ROOM-5", "20261205", {0.0, 0.0, 0.0, 0.0}).result).ok());

  StoreOptions read_only;
  read_only.read_only = true;
  auto store = Store::Open(file, read_only);
  REQUIRE(store.ok());
  TableOptions options;
  options.from_date = "2026-11-01";
  options.to_date = "2026-11-30";
  auto tables = BuildAuditTables(**store, options);
  REQUIRE(tables.ok());
  REQUIRE(tables->qc.size() == 2);
  const RoomQcHistory& room5 = tables->qc[0];
  CHECK(room5.station == "XR-ROOM-5");
  CHECK(room5.images == 2);
  REQUIRE(room5.pct_needs_review);
  CHECK(*room5.pct_needs_review == doctest::Approx(50.0));
  REQUIRE(room5.checks.size() == 2);  // the December check is after the period
  CHECK(room5.checks[0].date == "20250601");
  CHECK(room5.checks[0].overall == "pass");  // 5 mm and 5 mm, both within 20 mm
  const QcHistoryEntry& last = room5.checks[1];
  CHECK(last.date == "20261020");
  CHECK(last.overall == "fail");
  CHECK(last.width_axis == "fail");
  CHECK(last.length_axis == "pass");
  CHECK(last.worst_edge == "left");
  REQUIRE(last.worst_edge_pct_sid);
  CHECK(*last.worst_edge_pct_sid == doctest::Approx(1.2).epsilon(0.05));
  CHECK(tables->qc[1].station == "XR-ROOM-7");
  CHECK(tables->qc[1].checks.empty());

  REQUIRE(WriteAuditTables(*tables, TableFormat::kCsv, dir / "csv").ok());
  std::string csv = ReadAll(dir / "csv" / "qc-history.csv");
  CHECK(csv.find("21 CFR 1020.31") != std::string::npos);
  CHECK(csv.find("medical physicist") != std::string::npos);
  CHECK(csv.find("XR-ROOM-5,2,50,20261020,fail,fail,pass,left,") != std::string::npos);
  CHECK(csv.find("XR-ROOM-7,1,0,,no QC record in the store") != std::string::npos);

  ReportRequest request;
  request.store = file;
  request.period = "2026-11";
  request.out = dir / "report.html";
  request.chromium = dir / "no-chromium";
  auto written = WriteReports(request);
  REQUIRE_MESSAGE(written.ok(), written.error().ToString());
  std::string html = ReadAll(request.out);
  size_t section = html.find("Rooms: clinical audit beside the QC of the beam-limiting device");
  REQUIRE(section != std::string::npos);
  std::string part = html.substr(section);
  CHECK(part.find("2026-10-20") < part.find("2025-06-01"));  // newest first
  CHECK(part.find("2026-12-05") == std::string::npos);
  CHECK(part.find("left, 1.2") != std::string::npos);
  CHECK(part.find("no QC record in the store") != std::string::npos);
  CHECK(part.find("medical physicist&#39;s judgement decide") != std::string::npos);
  CHECK(part.find(dir.string()) == std::string::npos);  // no image paths
  std::filesystem::remove_all(dir);
}
