// The SQLite store: schema, migrations, de-duplication, keyed hashes, full disk.
#include <doctest/doctest.h>

#include <sqlite3.h>
#include <sys/stat.h>

#include <fstream>
#include <iterator>

#include "store/sha256.h"
#include "store/store_impl.h"
#include "store_fixtures.h"

using namespace beamtrim;
using namespace beamtrim::testing;

namespace {

// Independent read of the store with the SQLite C API: one integer or text per query.
std::string QueryText(const std::filesystem::path& file, const std::string& sql) {
  sqlite3* db = nullptr;
  sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr);
  sqlite3_stmt* stmt = nullptr;
  std::string out = "<error>";
  if (sqlite3_prepare_v2(db, sql.c_str(), -1, &stmt, nullptr) == SQLITE_OK) {
    out = "<no row>";
    if (sqlite3_step(stmt) == SQLITE_ROW) {
      const unsigned char* text = sqlite3_column_text(stmt, 0);
      out = text ? reinterpret_cast<const char*>(text) : "<null>";
    }
  }
  sqlite3_finalize(stmt);
  sqlite3_close(db);
  return out;
}

std::unique_ptr<Store> OpenOrFail(const std::filesystem::path& file, StoreOptions options = {}) {
  auto store = Store::Open(file, options);
  REQUIRE_MESSAGE(store.ok(), (store.ok() ? "" : store.error().ToString()));
  return std::move(store.value());
}

FileIdentity Id(const std::string& path, int64_t size = 100, int64_t mtime = 1) {
  return FileIdentity{path, size, mtime};
}

}  // namespace

TEST_CASE("NewStoreIsAtLatestSchemaInWalModeWithPrivateKey") {
  TempDir dir;
  auto file = dir / "audit.db";
  { auto store = OpenOrFail(file); CHECK(store->schema_version() == kStoreSchemaVersion); }
  CHECK(QueryText(file, "PRAGMA user_version") == std::to_string(kStoreSchemaVersion));
  CHECK(QueryText(file, "PRAGMA journal_mode") == "wal");
  CHECK(QueryText(file, "SELECT group_concat(version) FROM schema_version") == "1,2,3");
  CHECK(QueryText(file, "SELECT count(*) FROM sqlite_master WHERE name = 'qc_field_checks'") ==
        "1");
  struct stat info {};
  REQUIRE(::stat((dir / "audit.db.key").c_str(), &info) == 0);
  CHECK((info.st_mode & 0777) == 0600);
  CHECK(info.st_size == 32);
}

TEST_CASE("StoredRowKeepsRecordJsonColumnsAndKeyedHashesOnly") {
  TempDir dir;
  auto file = dir / "audit.db";
  RecordSpec spec;
  MeasuredImage image = MakeImage(spec, "/data/a.dcm");
  {
    auto store = OpenOrFail(file);
    auto outcome = store->Put(image, Id("/data/a.dcm"));
    REQUIRE(outcome.ok());
    CHECK(*outcome == PutOutcome::kInserted);
    auto json = store->RecordJson(spec.sop);
    REQUIRE(json.ok());
    REQUIRE(json->has_value());
    CHECK(**json == ToJsonLine(image.record));
  }
  CHECK(QueryText(file, "SELECT operator || '|' || station || '|' || month || '|' || outcome "
                        "FROM images") == "RT-07|ROOM-2|2026-03|acceptable");
  CHECK(QueryText(file, "SELECT excess_fraction FROM images") == "0.2");
  // Independent HMAC with the key file's bytes (RFC 2104 construction checked in sha256_test).
  std::ifstream key_in(dir / "audit.db.key", std::ios::binary);
  std::string key((std::istreambuf_iterator<char>(key_in)), {});
  std::string expected = store_internal::ToHex(
      store_internal::HmacSha256(key, "accession:" + image.accession_number));
  CHECK(QueryText(file, "SELECT accession_hash FROM images") == expected);
  // The raw identifiers appear nowhere in the database file or its WAL.
  for (const char* name : {"audit.db", "audit.db-wal"}) {
    std::ifstream in(dir / name, std::ios::binary);
    std::string bytes((std::istreambuf_iterator<char>(in)), {});
    CHECK(bytes.find(image.accession_number) == std::string::npos);
  }
}

TEST_CASE("SameSopInstanceInTwoFilesIsStoredOnceWithNote") {
  TempDir dir;
  auto store = OpenOrFail(dir / "audit.db");
  RecordSpec spec;
  REQUIRE(*store->Put(MakeImage(spec, "/a.dcm"), Id("/a.dcm")) == PutOutcome::kInserted);
  auto second = store->Put(MakeImage(spec, "/copy/a.dcm"), Id("/copy/a.dcm"));
  REQUIRE(second.ok());
  CHECK(*second == PutOutcome::kDuplicate);
  StoreCounts counts = store->Counts();
  CHECK(counts.ok == 1);
  CHECK(counts.duplicates == 1);
  auto found = store->Find("/copy/a.dcm");
  REQUIRE(found.ok());
  REQUIRE(found->has_value());
  CHECK((*found)->duplicate);
  CHECK(QueryText(dir / "audit.db", "SELECT note FROM duplicates")
            .find("same SOP Instance UID as the stored file /a.dcm") != std::string::npos);
}

TEST_CASE("ChangedFileReplacesItsOwnRow") {
  TempDir dir;
  auto store = OpenOrFail(dir / "audit.db");
  RecordSpec spec;
  REQUIRE(*store->Put(MakeImage(spec, "/a.dcm"), Id("/a.dcm", 100, 1)) == PutOutcome::kInserted);
  spec.outcome = "needs review";
  auto again = store->Put(MakeImage(spec, "/a.dcm"), Id("/a.dcm", 120, 2));
  REQUIRE(again.ok());
  CHECK(*again == PutOutcome::kReplaced);
  CHECK(store->Counts().ok == 1);
  auto found = store->Find("/a.dcm");
  REQUIRE(found->has_value());
  CHECK((*found)->identity == Id("/a.dcm", 120, 2));
  CHECK(QueryText(dir / "audit.db", "SELECT outcome FROM images") == "needs review");
}

TEST_CASE("ErrorRecordsWithoutSopAreStoredPerFile") {
  TempDir dir;
  auto store = OpenOrFail(dir / "audit.db");
  RecordSpec bad;
  bad.sop = "";
  bad.status = RecordStatus::kError;
  bad.reason = "/x/1.dcm: (7FE0,0010) Pixel Data: truncated";
  REQUIRE(store->Put(MakeImage(bad, "/x/1.dcm"), Id("/x/1.dcm")).ok());
  REQUIRE(store->Put(MakeImage(bad, "/x/2.dcm"), Id("/x/2.dcm")).ok());
  CHECK(store->Counts().error == 2);
  auto found = store->Find("/x/1.dcm");
  REQUIRE(found->has_value());
  CHECK((*found)->status == RecordStatus::kError);
}

TEST_CASE("VersionOneStoreIsMigratedKeepingItsRows") {
  TempDir dir;
  auto file = dir / "old.db";
  REQUIRE(MigrateStoreFile(file, 1).ok());
  CHECK(QueryText(file, "PRAGMA user_version") == "1");
  {
    // A row as version 1 wrote it.
    sqlite3* db = nullptr;
    sqlite3_open(file.c_str(), &db);
    REQUIRE(sqlite3_exec(db,
                         "INSERT INTO images (file_path, file_size, file_mtime_ns, "
                         "sop_instance_uid, status, software_version, record_json, stored_utc) "
                         "VALUES ('/old.dcm', 10, 5, '1.2.3', 'ok', '0.0.9', '{}', 'then')",
                         nullptr, nullptr, nullptr) == SQLITE_OK);
    sqlite3_close(db);
  }
  CHECK(QueryText(file, "SELECT count(*) FROM sqlite_master WHERE name = 'duplicates'") == "0");
  {
    auto store = OpenOrFail(file);
    CHECK(store->schema_version() == kStoreSchemaVersion);
    auto found = store->Find("/old.dcm");
    REQUIRE(found->has_value());
    CHECK((*found)->identity == Id("/old.dcm", 10, 5));
    // The version 2 behaviour works on the migrated file.
    auto dup = store->Put(MakeImage(RecordSpec{.sop = "1.2.3"}, "/new.dcm"), Id("/new.dcm"));
    REQUIRE(dup.ok());
    CHECK(*dup == PutOutcome::kDuplicate);
  }
  CHECK(QueryText(file, "PRAGMA user_version") == "3");
  CHECK(QueryText(file, "SELECT record_version FROM images WHERE file_path = '/old.dcm'") == "1");
  CHECK(QueryText(file, "SELECT group_concat(version) FROM schema_version") == "1,2,3");
}

TEST_CASE("StoreNewerThanProgramIsRefused") {
  TempDir dir;
  auto file = dir / "future.db";
  { auto store = OpenOrFail(file); }
  sqlite3* db = nullptr;
  sqlite3_open(file.c_str(), &db);
  sqlite3_exec(db, "PRAGMA user_version = 99", nullptr, nullptr, nullptr);
  sqlite3_close(db);
  auto store = Store::Open(file);
  REQUIRE_FALSE(store.ok());
  CHECK(store.error().reason.find("newer than this program knows") != std::string::npos);
  CHECK(store.error().file == file.string());
}

TEST_CASE("ForeignFilesAreRefusedAsStores") {
  TempDir dir;
  WriteFile(dir / "notes.txt", std::string(4096, 'z'));
  auto text = Store::Open(dir / "notes.txt");
  REQUIRE_FALSE(text.ok());
  CHECK(text.error().reason.find("not a beamtrim store") != std::string::npos);

  sqlite3* db = nullptr;
  sqlite3_open((dir / "other.db").c_str(), &db);
  sqlite3_exec(db, "CREATE TABLE t (x)", nullptr, nullptr, nullptr);
  sqlite3_close(db);
  auto other = Store::Open(dir / "other.db");
  REQUIRE_FALSE(other.ok());
  CHECK(other.error().reason.find("not a beamtrim store") != std::string::npos);

  StoreOptions must;
  must.must_exist = true;
  auto missing = Store::Open(dir / "missing.db", must);
  REQUIRE_FALSE(missing.ok());
  CHECK(missing.error().kind == ErrorKind::kNotFound);
}

TEST_CASE("KeyFileReadableByOthersIsRefused") {
  TempDir dir;
  WriteFile(dir / "k", std::string(32, 'k'));
  ::chmod((dir / "k").c_str(), 0644);
  auto key = LoadOrCreateKey(dir / "k");
  REQUIRE_FALSE(key.ok());
  CHECK(key.error().reason.find("chmod 600") != std::string::npos);
  ::chmod((dir / "k").c_str(), 0600);
  CHECK(LoadOrCreateKey(dir / "k").ok());
}

TEST_CASE("FullStoreReportsSqliteFullAndKeepsStoredRecords") {
  TempDir dir;
  auto file = dir / "full.db";
  { auto store = OpenOrFail(file); }
  StoreOptions limited;
  // A few pages over the empty schema: PRAGMA max_page_count stands in for a full disk.
  limited.max_page_count = std::stoll(QueryText(file, "PRAGMA page_count")) + 3;
  int64_t stored = 0;
  std::optional<Error> failure;
  {
    auto store = OpenOrFail(file, limited);
    for (int i = 0; i < 500 && !failure; ++i) {
      RecordSpec spec;
      spec.sop = "1.2.3." + std::to_string(i);
      auto outcome = store->Put(MakeImage(spec), Id("/f" + std::to_string(i)));
      if (outcome.ok()) {
        ++stored;
      } else {
        failure = outcome.error();
      }
    }
  }
  REQUIRE(failure.has_value());
  CHECK(failure->kind == ErrorKind::kStore);
  CHECK(failure->file == file.string());
  CHECK(failure->reason.find("SQLITE_FULL") != std::string::npos);
  CHECK(stored > 0);
  auto store = OpenOrFail(file);
  CHECK(store->Counts().ok == stored);
  CHECK(QueryText(file, "PRAGMA integrity_check") == "ok");
}

TEST_CASE("EveryPerRecordStatementUsesAnIndex") {
  // SQLite's own planner (EXPLAIN QUERY PLAN, sqlite.org/eqp.html) on the store's real schema:
  // a statement run once per record must SEARCH by an index, never SCAN a table, or its cost
  // grows with the store. Regression: the SOP look-up scanned `images` for every record written
  // because the partial index images_sop was not usable for `sop_instance_uid = ?` alone.
  TempDir dir;
  auto file = dir / "audit.db";
  { auto store = OpenOrFail(file); }
  sqlite3* db = nullptr;
  REQUIRE(sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK);
  for (const std::string& sql : store_internal::PerRecordQueries()) {
    sqlite3_stmt* stmt = nullptr;
    std::string explain = "EXPLAIN QUERY PLAN " + sql;
    REQUIRE_MESSAGE(sqlite3_prepare_v2(db, explain.c_str(), -1, &stmt, nullptr) == SQLITE_OK, sql);
    std::string plan;
    while (sqlite3_step(stmt) == SQLITE_ROW) {
      plan += reinterpret_cast<const char*>(sqlite3_column_text(stmt, 3));
      plan += "; ";
    }
    sqlite3_finalize(stmt);
    INFO(sql << " -> " << plan);
    CHECK(plan.find("SCAN") == std::string::npos);
  }
  sqlite3_close(db);
}

TEST_CASE("FailedBatchStoresNoneOfItsRecords") {
  TempDir dir;
  auto file = dir / "full.db";
  {
    auto store = OpenOrFail(file);
    REQUIRE(store->Put(MakeImage(RecordSpec{}, "/kept.dcm"), Id("/kept.dcm")).ok());
  }
  StoreOptions limited;
  limited.max_page_count = std::stoll(QueryText(file, "PRAGMA page_count")) + 3;
  auto store = OpenOrFail(file, limited);
  std::vector<std::pair<MeasuredImage, FileIdentity>> batch;
  for (int i = 0; i < 300; ++i) {  // far more than three pages of records
    RecordSpec spec;
    spec.sop = "1.2.3.9." + std::to_string(i);
    batch.emplace_back(MakeImage(spec), Id("/b" + std::to_string(i)));
  }
  std::vector<PutOutcome> outcomes;
  Status status = store->PutBatch(batch, &outcomes);
  REQUIRE_FALSE(status.ok());
  CHECK(status.error().reason.find("SQLITE_FULL") != std::string::npos);
  CHECK(outcomes.empty());
  // All or none (SQLite transactions): only the record stored before the batch remains.
  CHECK(store->Counts().ok == 1);
  CHECK(QueryText(file, "SELECT count(*) FROM images") == "1");
  // The store still takes writes after the failed batch (cached statements were reset).
  StoreOptions unlimited;
  store.reset();
  auto again = OpenOrFail(file, unlimited);
  REQUIRE(again->PutBatch({batch.begin(), batch.begin() + 2}, &outcomes).ok());
  CHECK(again->Counts().ok == 3);
}

TEST_CASE("LookUpsSeeRowsCommittedByAnotherConnection") {
  // A read left open would pin the connection to an old WAL snapshot (SQLite documentation,
  // "Write-Ahead Logging": a read transaction sees the database as of its start).
  TempDir dir;
  auto file = dir / "audit.db";
  auto first = OpenOrFail(file);
  REQUIRE(first->Put(MakeImage(RecordSpec{.sop = "1.2.3.70"}, "/a.dcm"), Id("/a.dcm")).ok());
  REQUIRE(first->Find("/a.dcm")->has_value());
  REQUIRE_FALSE(first->Find("/b.dcm")->has_value());
  auto second = OpenOrFail(file);
  REQUIRE(second->Put(MakeImage(RecordSpec{.sop = "1.2.3.71"}, "/b.dcm"), Id("/b.dcm")).ok());
  CHECK(first->Find("/b.dcm")->has_value());
  // And the first connection's SOP look-up sees it too: the same UID is a duplicate now.
  auto dup = first->Put(MakeImage(RecordSpec{.sop = "1.2.3.71"}, "/c.dcm"), Id("/c.dcm"));
  REQUIRE(dup.ok());
  CHECK(*dup == PutOutcome::kDuplicate);
}

TEST_CASE("ForEachRecordStreamsFullRecordsWithinTheRange") {
  TempDir dir;
  auto file = dir / "audit.db";
  auto store = OpenOrFail(file);
  const char* dates[] = {"20260130", "20260214", "20260301", "20260331", "20260402"};
  for (int i = 0; i < 5; ++i) {
    RecordSpec spec;
    spec.sop = "1.2.3.80." + std::to_string(i);
    spec.study_date = dates[i];
    spec.excess_fraction = 0.1 * (i + 1);
    std::string path = "/r" + std::to_string(i) + ".dcm";
    REQUIRE(store->Put(MakeImage(spec, i == 2 ? "" : path), Id(path)).ok());
  }
  RecordSpec failed;
  failed.sop = "";
  failed.status = RecordStatus::kError;
  failed.study_date = "20260305";
  REQUIRE(store->Put(MakeImage(failed, "/bad.dcm"), Id("/bad.dcm")).ok());

  RecordRange range;
  range.from_month = "2026-02";
  range.to_month = "2026-03";
  std::vector<std::string> sops, files;
  std::vector<double> fractions;
  int64_t unreadable = 0;
  REQUIRE(store
              ->ForEachRecord(
                  range,
                  [&](const StoredRecord& r) {
                    sops.push_back(r.record.sop_instance_uid);
                    files.push_back(r.record.file);
                    fractions.push_back(*r.record.excess->fraction_at_0mm);
                    return true;
                  },
                  &unreadable)
              .ok());
  // Synthetic ground truth: February and March hold records 1, 2 and 3; the error row is left out.
  CHECK(sops == std::vector<std::string>{"1.2.3.80.1", "1.2.3.80.2", "1.2.3.80.3"});
  CHECK(files == std::vector<std::string>{"/r1.dcm", "/r2.dcm", "/r3.dcm"});  // path filled in
  CHECK(fractions[2] == doctest::Approx(0.4));
  CHECK(unreadable == 0);

  range = RecordRange{};
  range.from_date = "20260301";
  range.to_date = "20260331";
  int count = 0;
  REQUIRE(store->ForEachRecord(range, [&](const StoredRecord&) { return ++count < 100; }).ok());
  CHECK(count == 2);
  count = 0;
  REQUIRE(store->ForEachRecord({}, [&](const StoredRecord&) { return ++count < 2; }).ok());
  CHECK(count == 2);  // the visitor stopped the stream

  sqlite3* db = nullptr;
  sqlite3_open(file.c_str(), &db);
  REQUIRE(sqlite3_exec(db,
                       "UPDATE images SET record_json = '{not json' WHERE sop_instance_uid = "
                       "'1.2.3.80.4'",
                       nullptr, nullptr, nullptr) == SQLITE_OK);
  sqlite3_close(db);
  count = 0;
  REQUIRE(store
              ->ForEachRecord(
                  {}, [&](const StoredRecord&) { return ++count > 0; }, &unreadable)
              .ok());
  CHECK(count == 4);
  CHECK(unreadable == 1);
}

TEST_CASE("VersionTwoStoreWithAnEarlierQcTableKeepsItsQcRecords") {
  // Before schema version 3 the QC command created qc_field_checks itself; migration 3 must
  // adopt such a table with its rows.
  TempDir dir;
  auto file = dir / "v2.db";
  REQUIRE(MigrateStoreFile(file, 2).ok());
  sqlite3* db = nullptr;
  sqlite3_open(file.c_str(), &db);
  REQUIRE(sqlite3_exec(db, R"sql(
    CREATE TABLE IF NOT EXISTS qc_field_checks (
      id INTEGER PRIMARY KEY, station TEXT NOT NULL DEFAULT '', check_date TEXT NOT NULL DEFAULT '',
      image_file TEXT NOT NULL DEFAULT '',
      overall TEXT NOT NULL CHECK (overall IN ('pass', 'fail', 'incomplete')), sid_mm REAL,
      edge_definition TEXT NOT NULL, left_mm REAL, right_mm REAL, top_mm REAL, bottom_mm REAL,
      width_sum_mm REAL, length_sum_mm REAL, centre_mm REAL, software_version TEXT NOT NULL,
      result_json TEXT NOT NULL, stored_utc TEXT NOT NULL);
    INSERT INTO qc_field_checks (station, check_date, overall, sid_mm, edge_definition, left_mm,
      software_version, result_json, stored_utc)
      VALUES ('ROOM-3', '20251020', 'pass', 1000, 'quarter-maximum', 4.5, '0.1.0', '{}', 'then');
  )sql",
                       nullptr, nullptr, nullptr) == SQLITE_OK);
  sqlite3_close(db);
  auto store = OpenOrFail(file);
  CHECK(store->schema_version() == 3);
  std::vector<QcCheckRow> rows;
  REQUIRE(store
              ->ForEachQcCheck("", "",
                               [&](const QcCheckRow& r) {
                                 rows.push_back(r);
                                 return true;
                               })
              .ok());
  REQUIRE(rows.size() == 1);
  CHECK(rows[0].station == "ROOM-3");
  CHECK(rows[0].misalignment_mm[0] == 4.5);
  CHECK_FALSE(rows[0].misalignment_mm[1].has_value());
  CHECK(QueryText(file, "SELECT group_concat(version) FROM schema_version") == "1,2,3");
}

TEST_CASE("QcChecksAreFilteredByRoomAndDateOldestFirst") {
  TempDir dir;
  auto store = OpenOrFail(dir / "audit.db");
  auto put = [&](const std::string& room, const std::string& date, const std::string& overall) {
    QcCheckRow row;
    row.station = room;
    row.check_date = date;
    row.overall = overall;
    row.edge_definition = "quarter-maximum";
    row.result_json = "{}";
    auto id = store->PutQcCheck(row);
    REQUIRE(id.ok());
    return *id;
  };
  put("ROOM-1", "20260310", "pass");
  put("ROOM-2", "20260105", "fail");
  put("ROOM-1", "20260101", "incomplete");
  std::vector<std::string> seen;
  auto collect = [&](const QcCheckRow& r) {
    seen.push_back(r.station + "@" + r.check_date);
    return true;
  };
  REQUIRE(store->ForEachQcCheck("", "", collect).ok());
  CHECK(seen == std::vector<std::string>{"ROOM-1@20260101", "ROOM-2@20260105", "ROOM-1@20260310"});
  seen.clear();
  REQUIRE(store->ForEachQcCheck("ROOM-1", "20260301", collect).ok());
  CHECK(seen == std::vector<std::string>{"ROOM-1@20260101"});
  QcCheckRow bad;
  bad.overall = "maybe";  // refused by the table's CHECK constraint
  bad.edge_definition = "quarter-maximum";
  auto refused = store->PutQcCheck(bad);
  REQUIRE_FALSE(refused.ok());
  CHECK(refused.error().file == (dir / "audit.db").string());
}
