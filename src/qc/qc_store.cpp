// QC records in the audit store: one row per QC exposure with the room (station), the date,
// the headline figures and the full result as JSON, so tables and reports can show each
// room's QC history. The store file is opened (and migrated) through Store::Open first, so a
// QC record never goes into a file that is not a beamtrim store or is newer than this program.
// The qc_field_checks table is created here with CREATE TABLE IF NOT EXISTS: the store's own
// migration list is closed to other layers (docs/qc.md, "Store").
#include <chrono>
#include <ctime>

#include <nlohmann/json.hpp>

#include "beamtrim/qc.h"
#include "beamtrim/store.h"
#include "beamtrim/version.h"
#include "store/sqlite_db.h"

namespace beamtrim {
namespace {

using store_internal::Database;

constexpr const char* kQcTableSql = R"sql(
CREATE TABLE IF NOT EXISTS qc_field_checks (
  id INTEGER PRIMARY KEY,
  station TEXT NOT NULL DEFAULT '',
  check_date TEXT NOT NULL DEFAULT '',
  image_file TEXT NOT NULL DEFAULT '',
  overall TEXT NOT NULL CHECK (overall IN ('pass', 'fail', 'incomplete')),
  sid_mm REAL,
  edge_definition TEXT NOT NULL,
  left_mm REAL, right_mm REAL, top_mm REAL, bottom_mm REAL,
  width_sum_mm REAL,
  length_sum_mm REAL,
  centre_mm REAL,
  software_version TEXT NOT NULL,
  result_json TEXT NOT NULL,
  stored_utc TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS qc_field_checks_station ON qc_field_checks (station, check_date);
)sql";

std::string NowUtc() {
  std::time_t now = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm tm{};
  gmtime_r(&now, &tm);
  char text[32];
  std::strftime(text, sizeof text, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return text;
}

Status OpenQcTable(const std::filesystem::path& file, bool create, Database* db) {
  StoreOptions options;
  options.must_exist = !create;
  {
    auto store = Store::Open(file, options);  // validates and migrates; closed at once
    if (!store.ok()) return store.error();
  }
  if (Status s = db->Open(file.string(), SQLITE_OPEN_READWRITE); !s) return s;
  if (Status s = db->Exec("PRAGMA busy_timeout = 10000;"); !s) return s;
  return db->Exec(kQcTableSql);
}

}  // namespace

Result<int64_t> SaveQcRecord(const std::filesystem::path& store_file, const QcResult& r) {
  Database db;
  if (Status s = OpenQcTable(store_file, true, &db); !s) return s.error();
  auto insert = db.Prepare(
      "INSERT INTO qc_field_checks (station, check_date, image_file, overall, sid_mm, "
      "edge_definition, left_mm, right_mm, top_mm, bottom_mm, width_sum_mm, length_sum_mm, "
      "centre_mm, software_version, result_json, stored_utc) "
      "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
  if (!insert) return insert.error();
  insert->Bind(1, r.station).Bind(2, r.date).Bind(3, r.image_file).Bind(4, r.overall);
  insert->Bind(5, r.sid_mm).Bind(6, std::string(EdgeDefinitionName(r.edge_definition)));
  for (int i = 0; i < 4; ++i) insert->Bind(7 + i, r.edges[i].misalignment_mm);
  insert->Bind(11, r.width_axis.value_mm).Bind(12, r.length_axis.value_mm);
  insert->Bind(13, r.centre.value_mm).Bind(14, std::string(kVersion));
  insert->Bind(15, QcToJson(r).dump()).Bind(16, NowUtc());
  if (int code = insert->Step(); code != SQLITE_DONE) {
    return db.MakeStoreError(code, "cannot store the QC record");
  }
  return static_cast<int64_t>(sqlite3_last_insert_rowid(db.handle()));
}

Result<std::vector<QcHistoryRow>> LoadQcHistory(const std::filesystem::path& store_file,
                                                const std::string& station) {
  Database db;
  if (Status s = OpenQcTable(store_file, false, &db); !s) return s.error();
  auto query = db.Prepare(
      "SELECT id, station, check_date, overall, sid_mm, width_sum_mm, length_sum_mm, centre_mm, "
      "result_json FROM qc_field_checks WHERE (?1 = '' OR station = ?1) "
      "ORDER BY check_date, id");
  if (!query) return query.error();
  query->Bind(1, station);
  std::vector<QcHistoryRow> rows;
  for (;;) {
    int code = query->Step();
    if (code == SQLITE_DONE) break;
    if (code != SQLITE_ROW) return db.MakeStoreError(code, "cannot read the QC records");
    QcHistoryRow row;
    row.id = query->Int(0);
    row.station = query->Text(1);
    row.date = query->Text(2);
    row.overall = query->Text(3);
    row.sid_mm = query->Real(4);
    row.width_sum_mm = query->Real(5);
    row.length_sum_mm = query->Real(6);
    row.centre_mm = query->Real(7);
    row.result_json = query->Text(8);
    rows.push_back(std::move(row));
  }
  return rows;
}

}  // namespace beamtrim
