// Store: the durable audit store, one SQLite file (WAL mode) holding one row per measured
// file, the duplicate notes, the QC records of each room and the schema history. Schema and
// policies: docs/store.md.
// A Store is safe to share between threads: every call takes an internal lock, and every write
// is one transaction. Keyed hashes use a secret key file created on first use (mode 0600).
#pragma once

#include <array>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/record.h"
#include "beamtrim/status.h"

namespace beamtrim {

// Latest store schema version (PRAGMA user_version); migrations bring older files up to it.
inline constexpr int kStoreSchemaVersion = 3;

// Which file a record came from. A file whose path, size and modification time all match a
// stored row is not measured again (docs/store.md, "Resume").
struct FileIdentity {
  std::string path;       // as given to the scan (absolute when the scan made it so)
  int64_t size = 0;       // bytes
  int64_t mtime_ns = 0;   // modification time, ns since the epoch
  friend bool operator==(const FileIdentity&, const FileIdentity&) = default;
};

// Reads the size and modification time of a file.
Result<FileIdentity> StatFile(const std::filesystem::path& file);

// One measured file as the store receives it. The accession number and study UID are used
// only to derive keyed hashes; they are never written.
struct MeasuredImage {
  ImageRecord record;
  std::string accession_number;
  std::string study_instance_uid;
};

// What Put() did with a record.
enum class PutOutcome {
  kInserted,   // a new row
  kReplaced,   // the same path had changed on disk: its row was replaced
  kDuplicate,  // the SOP instance is already stored from another file: a note was recorded
};
const char* PutOutcomeName(PutOutcome outcome);

// The columns extracted from an ImageRecord for grouping and aggregation (docs/store.md).
struct ExtractedColumns {
  std::string outcome;  // verdict outcome; empty when there is no verdict
  bool assessable = false;          // a verdict other than "not assessable"
  bool all_borders_visible = false; // a blade shadow on all four sides
  bool anatomy_clipped = false;     // anatomy runs into at least one blade edge
  bool blanked_or_cropped = false;  // outside masked or image cut after exposure
  std::optional<double> excess_fraction;          // at 0 mm margin
  std::optional<double> excess_area_mm2;          // detector plane
  std::optional<double> excess_area_patient_mm2;  // patient plane
  std::optional<double> kap_dgy_cm2;
  std::optional<double> avoidable_kap_dgy_cm2;
};
ExtractedColumns ExtractColumns(const ImageRecord& record);

// What is already known about a path.
struct StoredFile {
  FileIdentity identity;
  RecordStatus status = RecordStatus::kOk;
  bool duplicate = false;  // known from the duplicate notes, not the image rows
};

// A row as the tables read it: grouping attributes plus extracted columns.
struct StoredRow {
  std::string operator_name;
  std::string station;
  std::string body_part;
  std::string view;
  std::string protocol;
  std::string study_date;  // YYYYMMDD
  std::string month;       // YYYY-MM
  ExtractedColumns values;
};

// Which image rows ForEachRecord visits: status ok, study month and study date within the
// bounds (inclusive; empty = open end).
struct RecordRange {
  std::string from_month, to_month;  // YYYY-MM
  std::string from_date, to_date;    // YYYYMMDD
};

// A stored record as the reports read it.
struct StoredRecord {
  std::string file_path;  // the measured file (also record.file)
  ImageRecord record;
};

// One QC exposure of a room's beam-limiting device, as the store keeps it (table
// qc_field_checks, docs/qc.md). The QC layer fills it from its analysis; the store only keeps it.
struct QcCheckRow {
  int64_t id = 0;            // set by the store
  std::string station;       // room (Station Name)
  std::string check_date;    // YYYYMMDD of the exposure
  std::string image_file;
  std::string overall;       // "pass", "fail" or "incomplete"
  std::optional<double> sid_mm;
  std::string edge_definition;  // "quarter-maximum" or "half-transition"
  // Misalignment per edge (x-ray minus light, mm at the detector), indexed by Side.
  std::array<std::optional<double>, 4> misalignment_mm;
  std::optional<double> width_sum_mm;   // |left| + |right|
  std::optional<double> length_sum_mm;  // |top| + |bottom|
  std::optional<double> centre_mm;
  std::string software_version;
  std::string result_json;  // schema beamtrim.qc-field
  std::string stored_utc;   // set by the store
};

struct StoreCounts {
  int64_t ok = 0;
  int64_t skipped = 0;
  int64_t error = 0;
  int64_t duplicates = 0;
};

struct StoreOptions {
  // Secret key for the accession / study UID hashes. Empty = "<store file>.key".
  std::filesystem::path key_file;
  // Open an existing store only; never create one (the tables command uses this).
  bool must_exist = false;
  // Testing aid: limit the database size in pages (PRAGMA max_page_count) to provoke
  // SQLITE_FULL as a full disk would. 0 = no limit.
  int64_t max_page_count = 0;
  // Open for reading only (no migrations are applied; an old schema is an error).
  bool read_only = false;
};

class Store {
 public:
  // Opens or creates the store, migrating an older schema to kStoreSchemaVersion.
  // Errors name the file and the SQLite reason; a newer schema than this program knows is
  // refused rather than misread.
  static Result<std::unique_ptr<Store>> Open(const std::filesystem::path& file,
                                             const StoreOptions& options = {});
  ~Store();
  Store(const Store&) = delete;
  Store& operator=(const Store&) = delete;

  const std::filesystem::path& file() const;
  int schema_version() const;

  // The stored row or duplicate note for this path, if any.
  Result<std::optional<StoredFile>> Find(const std::string& path) const;

  // Writes one record in its own transaction.
  Result<PutOutcome> Put(const MeasuredImage& image, const FileIdentity& identity);
  // Writes several records in one transaction: all or none. `outcomes` gets one per image.
  Status PutBatch(const std::vector<std::pair<MeasuredImage, FileIdentity>>& images,
                  std::vector<PutOutcome>* outcomes);

  StoreCounts Counts() const;

  // Visits every image row with status ok whose study date lies in [from, to] (YYYYMMDD,
  // empty = open end), in insertion order. Rows are streamed, never held together.
  // The visitor returns false to stop early.
  Status ForEachRow(const std::string& from_date, const std::string& to_date,
                    const std::function<bool(const StoredRow&)>& visit) const;

  // Visits every image row with status ok within `range`, in insertion order, as the full record
  // parsed from its JSON. Rows are streamed, never held together. A row whose JSON cannot be
  // read is skipped and counted in `unreadable` (when given). The visitor returns false to stop
  // early. The visitor must not call back into this Store (it runs under the store's lock).
  Status ForEachRecord(const RecordRange& range,
                       const std::function<bool(const StoredRecord&)>& visit,
                       int64_t* unreadable = nullptr) const;

  // Writes one QC record in its own transaction; returns its id.
  Result<int64_t> PutQcCheck(const QcCheckRow& row);
  // Visits the QC records of one room (empty = every room) dated on or before `to_date`
  // (YYYYMMDD, empty = no bound), oldest first (date, then id). Same rules as ForEachRecord.
  Status ForEachQcCheck(const std::string& station, const std::string& to_date,
                        const std::function<bool(const QcCheckRow&)>& visit) const;

  // Keyed hash (HMAC-SHA256, hex) with this store's key, as stored for accession numbers and
  // study UIDs; for look-ups by a person who knows the identifier.
  std::string KeyedHash(const std::string& kind, const std::string& value) const;

  // Stored record JSON for a SOP Instance UID (for tests and look-ups).
  Result<std::optional<std::string>> RecordJson(const std::string& sop_instance_uid) const;

  struct Impl;

 private:
  explicit Store(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

// Applies migrations to an open-able SQLite file up to `target_version` (1..kStoreSchemaVersion)
// without creating a key. Exposed so tests can build an old-version store.
Status MigrateStoreFile(const std::filesystem::path& file, int target_version);

// Secret keys (32 random bytes): reads the file, or creates it with mode 0600 when absent.
// A key file readable by group or others is refused with a clear error.
Result<std::array<uint8_t, 32>> LoadOrCreateKey(const std::filesystem::path& key_file);

// "STAFF-" and six upper-case hex digits of HMAC-SHA256(key, "staff:" + name): stable for one
// key, unlinkable without it. Empty names become "STAFF-UNKNOWN".
std::string StaffPseudonym(const std::array<uint8_t, 32>& key, const std::string& name);

}  // namespace beamtrim
