// Store schema history. Each entry is frozen once released: fix mistakes with a new entry.
#include "store/migrations.h"

#include "beamtrim/store.h"
#include "beamtrim/version.h"

namespace beamtrim::store_internal {
namespace {

constexpr const char* kV1 = R"sql(
CREATE TABLE schema_version (
  version INTEGER PRIMARY KEY,
  applied_utc TEXT NOT NULL,
  software_version TEXT NOT NULL,
  description TEXT NOT NULL
);
CREATE TABLE images (
  id INTEGER PRIMARY KEY,
  file_path TEXT NOT NULL UNIQUE,
  file_size INTEGER NOT NULL,
  file_mtime_ns INTEGER NOT NULL,
  sop_instance_uid TEXT NOT NULL DEFAULT '',
  status TEXT NOT NULL CHECK (status IN ('ok', 'skipped', 'error')),
  reason TEXT NOT NULL DEFAULT '',
  accession_hash TEXT,
  study_hash TEXT,
  operator TEXT NOT NULL DEFAULT '',
  station TEXT NOT NULL DEFAULT '',
  body_part TEXT NOT NULL DEFAULT '',
  view TEXT NOT NULL DEFAULT '',
  protocol TEXT NOT NULL DEFAULT '',
  study_date TEXT NOT NULL DEFAULT '',
  month TEXT NOT NULL DEFAULT '',
  outcome TEXT NOT NULL DEFAULT '',
  assessable INTEGER NOT NULL DEFAULT 0,
  all_borders_visible INTEGER NOT NULL DEFAULT 0,
  anatomy_clipped INTEGER NOT NULL DEFAULT 0,
  blanked_or_cropped INTEGER NOT NULL DEFAULT 0,
  excess_fraction REAL,
  excess_area_mm2 REAL,
  excess_area_patient_mm2 REAL,
  kap_dgy_cm2 REAL,
  avoidable_kap_dgy_cm2 REAL,
  software_version TEXT NOT NULL,
  record_json TEXT NOT NULL,
  stored_utc TEXT NOT NULL
);
CREATE UNIQUE INDEX images_sop ON images (sop_instance_uid) WHERE sop_instance_uid <> '';
CREATE INDEX images_study_date ON images (study_date);
)sql";

// Version 2: notes for the same SOP instance found in a second file (version 1 refused the
// second file silently), the record schema version per row, and an index for monthly trends.
constexpr const char* kV2 = R"sql(
CREATE TABLE duplicates (
  id INTEGER PRIMARY KEY,
  file_path TEXT NOT NULL UNIQUE,
  file_size INTEGER NOT NULL,
  file_mtime_ns INTEGER NOT NULL,
  sop_instance_uid TEXT NOT NULL,
  image_id INTEGER NOT NULL REFERENCES images (id) ON DELETE CASCADE,
  note TEXT NOT NULL,
  stored_utc TEXT NOT NULL
);
ALTER TABLE images ADD COLUMN record_version INTEGER NOT NULL DEFAULT 1;
CREATE INDEX images_month ON images (month);
)sql";

// Version 3: the physicist's QC records of each room's beam-limiting device (docs/qc.md). IF NOT
// EXISTS because `qc-field` created this very table outside the migrations before version 3.
constexpr const char* kV3 = R"sql(
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

Status ApplyOne(Database& db, const Migration& migration) {
  Transaction transaction(db);
  if (Status s = transaction.Begin(); !s) return s;
  if (Status s = db.Exec(migration.sql); !s) return s;
  auto insert = db.Prepare(
      "INSERT INTO schema_version (version, applied_utc, software_version, description) "
      "VALUES (?, ?, ?, ?)");
  if (!insert) return insert.error();
  insert->Bind(1, int64_t{migration.version}).Bind(2, NowUtc()).Bind(3, std::string(kVersion));
  insert->Bind(4, std::string(migration.description));
  if (int code = insert->Step(); code != SQLITE_DONE) {
    return db.MakeStoreError(code, "cannot record schema version");
  }
  if (Status s = db.Exec("PRAGMA user_version = " + std::to_string(migration.version)); !s) {
    return s;
  }
  return transaction.Commit();
}

}  // namespace

const std::vector<Migration>& Migrations() {
  static const std::vector<Migration> migrations = {
      {1, "images table", kV1},
      {2, "duplicate notes, record version, month index", kV2},
      {3, "QC records of the beam-limiting devices (qc_field_checks)", kV3},
  };
  return migrations;
}

Result<int> ReadSchemaVersion(Database& db) {
  auto statement = db.Prepare("PRAGMA user_version");
  if (!statement) return statement.error();
  if (int code = statement->Step(); code != SQLITE_ROW) {
    return db.MakeStoreError(code, "cannot read the schema version");
  }
  return static_cast<int>(statement->Int(0));
}

Status MigrateTo(Database& db, int target) {
  auto current = ReadSchemaVersion(db);
  if (!current) return current.error();
  if (*current > kStoreSchemaVersion) {
    return MakeError(ErrorKind::kStore, db.file(),
                     "store schema version " + std::to_string(*current) +
                         " is newer than this program knows (" +
                         std::to_string(kStoreSchemaVersion) + "): update beamtrim");
  }
  for (const Migration& migration : Migrations()) {
    if (migration.version <= *current || migration.version > target) continue;
    if (Status s = ApplyOne(db, migration); !s) {
      Error error = s.error();
      error.reason = "migration to schema version " + std::to_string(migration.version) +
                     " failed, store left at version " +
                     std::to_string(migration.version - 1) + ": " + error.reason;
      return error;
    }
  }
  return Status::Ok();
}

}  // namespace beamtrim::store_internal
