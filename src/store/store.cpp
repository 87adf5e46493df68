// The SQLite store: opening and migrating, writing records with de-duplication, reading rows.
#include "beamtrim/store.h"

#include <chrono>
#include <ctime>
#include <mutex>

#include "beamtrim/version.h"
#include "store/migrations.h"
#include "store/sha256.h"
#include "store/sqlite_db.h"

namespace beamtrim {

using store_internal::Database;
using store_internal::Statement;
using store_internal::Transaction;

namespace {

constexpr const char* kColumns =
    "file_path, file_size, file_mtime_ns, sop_instance_uid, status, reason, accession_hash, "
    "study_hash, operator, station, body_part, view, protocol, study_date, month, outcome, "
    "assessable, all_borders_visible, anatomy_clipped, blanked_or_cropped, excess_fraction, "
    "excess_area_mm2, excess_area_patient_mm2, kap_dgy_cm2, avoidable_kap_dgy_cm2, "
    "software_version, record_json, stored_utc, record_version";
constexpr int kColumnCount = 29;

std::string Placeholders(int count) {
  std::string out;
  for (int i = 0; i < count; ++i) out += i ? ", ?" : "?";
  return out;
}

std::string NowUtc() {
  std::time_t now = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm tm{};
  gmtime_r(&now, &tm);
  char text[32];
  std::strftime(text, sizeof text, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return text;
}

RecordStatus StatusFromName(const std::string& name) {
  if (name == "skipped") return RecordStatus::kSkipped;
  if (name == "error") return RecordStatus::kError;
  return RecordStatus::kOk;
}

}  // namespace

const char* PutOutcomeName(PutOutcome outcome) {
  switch (outcome) {
    case PutOutcome::kInserted: return "inserted";
    case PutOutcome::kReplaced: return "replaced";
    case PutOutcome::kDuplicate: return "duplicate";
  }
  return "inserted";
}

struct Store::Impl {
  std::filesystem::path file;
  Database db;
  mutable std::mutex mutex;
  int version = 0;
  std::optional<std::array<uint8_t, 32>> key;
  std::filesystem::path key_file;

  std::string Hash(const std::string& kind, const std::string& value) const {
    if (value.empty() || !key) return {};
    std::string_view key_view(reinterpret_cast<const char*>(key->data()), key->size());
    return store_internal::ToHex(store_internal::HmacSha256(key_view, kind + ":" + value));
  }

  Status BindRow(Statement& s, const MeasuredImage& image, const FileIdentity& id) const;
  Result<PutOutcome> PutLocked(const MeasuredImage& image, const FileIdentity& id);
  Status RecordDuplicate(const FileIdentity& id, const std::string& sop, int64_t image_id,
                         const std::string& stored_path);
};

Status Store::Impl::BindRow(Statement& s, const MeasuredImage& image,
                            const FileIdentity& id) const {
  const ImageRecord& r = image.record;
  const RecordContext& c = r.context;
  ExtractedColumns x = ExtractColumns(r);
  s.Bind(1, id.path).Bind(2, id.size).Bind(3, id.mtime_ns).Bind(4, r.sop_instance_uid);
  s.Bind(5, std::string(RecordStatusName(r.status))).Bind(6, r.reason);
  std::string accession = Hash("accession", image.accession_number);
  std::string study = Hash("study", image.study_instance_uid);
  if (accession.empty()) s.BindNull(7); else s.Bind(7, accession);
  if (study.empty()) s.BindNull(8); else s.Bind(8, study);
  s.Bind(9, c.operator_name).Bind(10, c.station).Bind(11, c.body_part).Bind(12, c.view);
  s.Bind(13, c.protocol).Bind(14, c.study_date).Bind(15, c.month).Bind(16, x.outcome);
  s.Bind(17, int64_t{x.assessable}).Bind(18, int64_t{x.all_borders_visible});
  s.Bind(19, int64_t{x.anatomy_clipped}).Bind(20, int64_t{x.blanked_or_cropped});
  s.Bind(21, x.excess_fraction).Bind(22, x.excess_area_mm2).Bind(23, x.excess_area_patient_mm2);
  s.Bind(24, x.kap_dgy_cm2).Bind(25, x.avoidable_kap_dgy_cm2);
  s.Bind(26, r.software_version.empty() ? std::string(kVersion) : r.software_version);
  s.Bind(27, ToJsonLine(r)).Bind(28, NowUtc()).Bind(29, int64_t{kRecordVersion});
  return Status::Ok();
}

Status Store::Impl::RecordDuplicate(const FileIdentity& id, const std::string& sop,
                                    int64_t image_id, const std::string& stored_path) {
  auto s = db.Prepare(
      "INSERT INTO duplicates (file_path, file_size, file_mtime_ns, sop_instance_uid, image_id, "
      "note, stored_utc) VALUES (?, ?, ?, ?, ?, ?, ?) ON CONFLICT (file_path) DO UPDATE SET "
      "file_size = excluded.file_size, file_mtime_ns = excluded.file_mtime_ns, "
      "sop_instance_uid = excluded.sop_instance_uid, image_id = excluded.image_id, "
      "note = excluded.note, stored_utc = excluded.stored_utc");
  if (!s) return s.error();
  s->Bind(1, id.path).Bind(2, id.size).Bind(3, id.mtime_ns).Bind(4, sop).Bind(5, image_id);
  s->Bind(6, "same SOP Instance UID as the stored file " + stored_path + ": not stored twice");
  s->Bind(7, NowUtc());
  if (int code = s->Step(); code != SQLITE_DONE) {
    return db.MakeStoreError(code, "cannot record a duplicate of " + id.path);
  }
  return Status::Ok();
}

Result<PutOutcome> Store::Impl::PutLocked(const MeasuredImage& image, const FileIdentity& id) {
  const std::string& sop = image.record.sop_instance_uid;
  // A re-measured path replaces whatever was known about it.
  auto drop_note = db.Prepare("DELETE FROM duplicates WHERE file_path = ?");
  if (!drop_note) return drop_note.error();
  drop_note->Bind(1, id.path);
  if (int code = drop_note->Step(); code != SQLITE_DONE) {
    return db.MakeStoreError(code, "cannot update " + id.path);
  }
  std::optional<int64_t> same_path;
  auto by_path = db.Prepare("SELECT id FROM images WHERE file_path = ?");
  if (!by_path) return by_path.error();
  by_path->Bind(1, id.path);
  if (by_path->Step() == SQLITE_ROW) same_path = by_path->Int(0);

  if (!sop.empty()) {
    auto by_sop = db.Prepare("SELECT id, file_path FROM images WHERE sop_instance_uid = ?");
    if (!by_sop) return by_sop.error();
    by_sop->Bind(1, sop);
    if (by_sop->Step() == SQLITE_ROW && (!same_path || by_sop->Int(0) != *same_path)) {
      int64_t other = by_sop->Int(0);
      std::string other_path = by_sop->Text(1);
      if (same_path) {
        auto drop = db.Prepare("DELETE FROM images WHERE id = ?");
        if (!drop) return drop.error();
        drop->Bind(1, *same_path);
        if (int code = drop->Step(); code != SQLITE_DONE) {
          return db.MakeStoreError(code, "cannot update " + id.path);
        }
      }
      if (Status st = RecordDuplicate(id, sop, other, other_path); !st) return st.error();
      return PutOutcome::kDuplicate;
    }
  }
  std::string sql =
      same_path ? std::string("UPDATE images SET (") + kColumns + ") = (" +
                      Placeholders(kColumnCount) + ") WHERE id = ?"
                : std::string("INSERT INTO images (") + kColumns + ") VALUES (" +
                      Placeholders(kColumnCount) + ")";
  auto write = db.Prepare(sql);
  if (!write) return write.error();
  if (Status st = BindRow(*write, image, id); !st) return st.error();
  if (same_path) write->Bind(kColumnCount + 1, *same_path);
  if (int code = write->Step(); code != SQLITE_DONE) {
    return db.MakeStoreError(code, "cannot store the record of " + id.path);
  }
  return same_path ? PutOutcome::kReplaced : PutOutcome::kInserted;
}

Store::Store(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Store::~Store() = default;

const std::filesystem::path& Store::file() const { return impl_->file; }
int Store::schema_version() const { return impl_->version; }

namespace {

Status Configure(Database& db, const StoreOptions& options) {
  // WAL: readers never block the writer, and a killed process loses only uncommitted
  // transactions. synchronous=NORMAL keeps commits cheap; a power cut (not a killed program)
  // may lose the last commits, never corrupt the file (SQLite documentation, "WAL mode").
  std::string pragmas = "PRAGMA busy_timeout = 10000; PRAGMA foreign_keys = ON;";
  if (!options.read_only) pragmas += "PRAGMA journal_mode = WAL; PRAGMA synchronous = NORMAL;";
  if (options.max_page_count > 0) {
    pragmas += "PRAGMA max_page_count = " + std::to_string(options.max_page_count) + ";";
  }
  return db.Exec(pragmas);
}

// A file with tables but no schema version was not made by beamtrim: refuse to touch it.
Status CheckForeign(Database& db, int version) {
  if (version != 0) return Status::Ok();
  auto tables = db.Prepare("SELECT count(*) FROM sqlite_master");
  if (!tables) return tables.error();
  if (tables->Step() == SQLITE_ROW && tables->Int(0) > 0) {
    return MakeError(ErrorKind::kStore, db.file(),
                     "the file is an SQLite database but not a beamtrim store");
  }
  return Status::Ok();
}

}  // namespace

Result<std::unique_ptr<Store>> Store::Open(const std::filesystem::path& file,
                                           const StoreOptions& options) {
  std::error_code ec;
  bool exists = std::filesystem::exists(file, ec);
  if ((options.must_exist || options.read_only) && !exists) {
    return MakeError(ErrorKind::kNotFound, file.string(), "store file not found");
  }
  auto impl = std::make_unique<Impl>();
  impl->file = file;
  int flags = SQLITE_OPEN_NOMUTEX |
              (options.read_only ? SQLITE_OPEN_READONLY
                                 : SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE);
  if (Status s = impl->db.Open(file.string(), flags); !s) return s.error();
  if (Status s = Configure(impl->db, options); !s) {
    Error e = s.error();
    if (e.reason.find("file is not a database") != std::string::npos) {
      e.reason = "not a beamtrim store (not an SQLite database)";
    }
    return e;
  }
  auto version = store_internal::ReadSchemaVersion(impl->db);
  if (!version) return version.error();
  if (Status s = CheckForeign(impl->db, *version); !s) return s.error();
  if (options.read_only) {
    if (*version != kStoreSchemaVersion) {
      return MakeError(ErrorKind::kStore, file.string(),
                       "store schema version " + std::to_string(*version) + ", expected " +
                           std::to_string(kStoreSchemaVersion) +
                           ": open it once for writing (beamtrim scan) to migrate it");
    }
  } else if (Status s = store_internal::MigrateTo(impl->db, kStoreSchemaVersion); !s) {
    return s.error();
  }
  impl->version = kStoreSchemaVersion;
  impl->key_file = options.key_file.empty() ? std::filesystem::path(file.string() + ".key")
                                            : options.key_file;
  if (!options.read_only || std::filesystem::exists(impl->key_file, ec)) {
    auto key = LoadOrCreateKey(impl->key_file);
    if (!key) return key.error();
    impl->key = *key;
  }
  return std::unique_ptr<Store>(new Store(std::move(impl)));
}

Result<std::optional<StoredFile>> Store::Find(const std::string& path) const {
  std::lock_guard lock(impl_->mutex);
  for (bool duplicate : {false, true}) {
    auto s = impl_->db.Prepare(
        duplicate ? "SELECT file_size, file_mtime_ns, 'ok' FROM duplicates WHERE file_path = ?"
                  : "SELECT file_size, file_mtime_ns, status FROM images WHERE file_path = ?");
    if (!s) return s.error();
    s->Bind(1, path);
    int code = s->Step();
    if (code == SQLITE_ROW) {
      StoredFile found;
      found.identity = {path, s->Int(0), s->Int(1)};
      found.status = StatusFromName(s->Text(2));
      found.duplicate = duplicate;
      return std::optional<StoredFile>(found);
    }
    if (code != SQLITE_DONE) return impl_->db.MakeStoreError(code, "cannot look up " + path);
  }
  return std::optional<StoredFile>();
}

Result<PutOutcome> Store::Put(const MeasuredImage& image, const FileIdentity& identity) {
  std::vector<PutOutcome> outcomes;
  if (Status s = PutBatch({{image, identity}}, &outcomes); !s) return s.error();
  return outcomes.front();
}

Status Store::PutBatch(const std::vector<std::pair<MeasuredImage, FileIdentity>>& images,
                       std::vector<PutOutcome>* outcomes) {
  std::lock_guard lock(impl_->mutex);
  outcomes->clear();
  Transaction transaction(impl_->db);
  if (Status s = transaction.Begin(); !s) return s;
  for (const auto& [image, identity] : images) {
    auto outcome = impl_->PutLocked(image, identity);
    if (!outcome) {
      outcomes->clear();
      return outcome.error();
    }
    outcomes->push_back(*outcome);
  }
  Status committed = transaction.Commit();
  if (!committed) outcomes->clear();
  return committed;
}

StoreCounts Store::Counts() const {
  std::lock_guard lock(impl_->mutex);
  StoreCounts counts;
  auto s = impl_->db.Prepare("SELECT status, count(*) FROM images GROUP BY status");
  if (s) {
    while (s->Step() == SQLITE_ROW) {
      RecordStatus status = StatusFromName(s->Text(0));
      int64_t n = s->Int(1);
      if (status == RecordStatus::kOk) counts.ok = n;
      if (status == RecordStatus::kSkipped) counts.skipped = n;
      if (status == RecordStatus::kError) counts.error = n;
    }
  }
  auto d = impl_->db.Prepare("SELECT count(*) FROM duplicates");
  if (d && d->Step() == SQLITE_ROW) counts.duplicates = d->Int(0);
  return counts;
}

Status Store::ForEachRow(const std::string& from_date, const std::string& to_date,
                         const std::function<bool(const StoredRow&)>& visit) const {
  std::lock_guard lock(impl_->mutex);
  auto s = impl_->db.Prepare(
      "SELECT operator, station, body_part, view, protocol, study_date, month, outcome, "
      "assessable, all_borders_visible, anatomy_clipped, blanked_or_cropped, excess_fraction, "
      "excess_area_mm2, excess_area_patient_mm2, kap_dgy_cm2, avoidable_kap_dgy_cm2 "
      "FROM images WHERE status = 'ok' AND (?1 = '' OR study_date >= ?1) "
      "AND (?2 = '' OR study_date <= ?2) ORDER BY id");
  if (!s) return s.error();
  s->Bind(1, from_date).Bind(2, to_date);
  StoredRow row;
  int code;
  while ((code = s->Step()) == SQLITE_ROW) {
    row.operator_name = s->Text(0);
    row.station = s->Text(1);
    row.body_part = s->Text(2);
    row.view = s->Text(3);
    row.protocol = s->Text(4);
    row.study_date = s->Text(5);
    row.month = s->Text(6);
    ExtractedColumns& v = row.values;
    v.outcome = s->Text(7);
    v.assessable = s->Int(8) != 0;
    v.all_borders_visible = s->Int(9) != 0;
    v.anatomy_clipped = s->Int(10) != 0;
    v.blanked_or_cropped = s->Int(11) != 0;
    v.excess_fraction = s->Real(12);
    v.excess_area_mm2 = s->Real(13);
    v.excess_area_patient_mm2 = s->Real(14);
    v.kap_dgy_cm2 = s->Real(15);
    v.avoidable_kap_dgy_cm2 = s->Real(16);
    if (!visit(row)) return Status::Ok();
  }
  if (code != SQLITE_DONE) return impl_->db.MakeStoreError(code, "cannot read the images");
  return Status::Ok();
}

std::string Store::KeyedHash(const std::string& kind, const std::string& value) const {
  return impl_->Hash(kind, value);
}

Result<std::optional<std::string>> Store::RecordJson(const std::string& sop) const {
  std::lock_guard lock(impl_->mutex);
  auto s = impl_->db.Prepare("SELECT record_json FROM images WHERE sop_instance_uid = ?");
  if (!s) return s.error();
  s->Bind(1, sop);
  if (s->Step() == SQLITE_ROW) return std::optional<std::string>(s->Text(0));
  return std::optional<std::string>();
}

Status MigrateStoreFile(const std::filesystem::path& file, int target_version) {
  Database db;
  if (Status s = db.Open(file.string(), SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE); !s) return s;
  if (Status s = db.Exec("PRAGMA journal_mode = WAL"); !s) return s;
  return store_internal::MigrateTo(db, target_version);
}

}  // namespace beamtrim
