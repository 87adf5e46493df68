// The SQLite store: opening and migrating, writing records with de-duplication.
// Reading is in store_read.cpp, the QC records in store_qc.cpp.
#include "beamtrim/store.h"

#include <mutex>

#include "beamtrim/version.h"
#include "store/migrations.h"
#include "store/sha256.h"
#include "store/sqlite_db.h"
#include "store/store_impl.h"

namespace beamtrim {

using store_internal::Database;
using store_internal::kFindImage;
using store_internal::kFindNote;
using store_internal::NowUtc;
using store_internal::ResetOnExit;
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

// Every statement of the write path, prepared once per connection (StatementCache).
const std::string kInsertImage = std::string("INSERT INTO images (") + kColumns + ") VALUES (" +
                                 Placeholders(kColumnCount) + ")";
const std::string kUpdateImage = std::string("UPDATE images SET (") + kColumns + ") = (" +
                                 Placeholders(kColumnCount) + ") WHERE id = ?";
constexpr const char* kDropNote = "DELETE FROM duplicates WHERE file_path = ?";
constexpr const char* kImageByPath = "SELECT id FROM images WHERE file_path = ?";
// The `<> ''` term repeats the WHERE of the partial index images_sop: without it SQLite cannot
// prove that a bound parameter is non-empty, does not use the index and scans the whole table
// for every record written (a cost that grew with the store: ~20 ms per record at 20 000 rows).
constexpr const char* kImageBySop =
    "SELECT id, file_path FROM images WHERE sop_instance_uid = ? AND sop_instance_uid <> ''";
constexpr const char* kDropImage = "DELETE FROM images WHERE id = ?";
constexpr const char* kUpsertNote =
    "INSERT INTO duplicates (file_path, file_size, file_mtime_ns, sop_instance_uid, image_id, "
    "note, stored_utc) VALUES (?, ?, ?, ?, ?, ?, ?) ON CONFLICT (file_path) DO UPDATE SET "
    "file_size = excluded.file_size, file_mtime_ns = excluded.file_mtime_ns, "
    "sop_instance_uid = excluded.sop_instance_uid, image_id = excluded.image_id, "
    "note = excluded.note, stored_utc = excluded.stored_utc";

void BindRow(Statement& s, const Store::Impl& impl, const MeasuredImage& image,
             const FileIdentity& id, const std::string& now) {
  const ImageRecord& r = image.record;
  const RecordContext& c = r.context;
  ExtractedColumns x = ExtractColumns(r);
  s.Bind(1, id.path).Bind(2, id.size).Bind(3, id.mtime_ns).Bind(4, r.sop_instance_uid);
  s.Bind(5, std::string(RecordStatusName(r.status))).Bind(6, r.reason);
  std::string accession = impl.Hash("accession", image.accession_number);
  std::string study = impl.Hash("study", image.study_instance_uid);
  if (accession.empty()) s.BindNull(7); else s.Bind(7, accession);
  if (study.empty()) s.BindNull(8); else s.Bind(8, study);
  s.Bind(9, c.operator_name).Bind(10, c.station).Bind(11, c.body_part).Bind(12, c.view);
  s.Bind(13, c.protocol).Bind(14, c.study_date).Bind(15, c.month).Bind(16, x.outcome);
  s.Bind(17, int64_t{x.assessable}).Bind(18, int64_t{x.all_borders_visible});
  s.Bind(19, int64_t{x.anatomy_clipped}).Bind(20, int64_t{x.blanked_or_cropped});
  s.Bind(21, x.excess_fraction).Bind(22, x.excess_area_mm2).Bind(23, x.excess_area_patient_mm2);
  s.Bind(24, x.kap_dgy_cm2).Bind(25, x.avoidable_kap_dgy_cm2);
  s.Bind(26, r.software_version.empty() ? std::string(kVersion) : r.software_version);
  s.Bind(27, ToJsonLine(r)).Bind(28, now).Bind(29, int64_t{kRecordVersion});
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

std::string Store::Impl::Hash(const std::string& kind, const std::string& value) const {
  if (value.empty() || !key) return {};
  std::string_view key_view(reinterpret_cast<const char*>(key->data()), key->size());
  return store_internal::ToHex(store_internal::HmacSha256(key_view, kind + ":" + value));
}

Status Store::Impl::RecordDuplicate(const FileIdentity& id, const std::string& sop,
                                    int64_t image_id, const std::string& stored_path) {
  auto s = statements.Get(kUpsertNote);
  if (!s) return s.error();
  ResetOnExit reset(*s);
  (*s)->Bind(1, id.path).Bind(2, id.size).Bind(3, id.mtime_ns).Bind(4, sop).Bind(5, image_id);
  (*s)->Bind(6, "same SOP Instance UID as the stored file " + stored_path + ": not stored twice");
  (*s)->Bind(7, NowUtc());
  if (int code = (*s)->Step(); code != SQLITE_DONE) {
    return db.MakeStoreError(code, "cannot record a duplicate of " + id.path);
  }
  return Status::Ok();
}

namespace {

// Runs a cached statement that returns no rows, with `bind` filling its parameters.
template <class Bind>
Status Run(Store::Impl& impl, const std::string& sql, const std::string& what, Bind bind) {
  auto s = impl.statements.Get(sql);
  if (!s) return s.error();
  ResetOnExit reset(*s);
  bind(**s);
  if (int code = (*s)->Step(); code != SQLITE_DONE) return impl.db.MakeStoreError(code, what);
  return Status::Ok();
}

}  // namespace

Result<PutOutcome> Store::Impl::PutLocked(const MeasuredImage& image, const FileIdentity& id) {
  const std::string& sop = image.record.sop_instance_uid;
  // A re-measured path replaces whatever was known about it.
  if (Status st = Run(*this, kDropNote, "cannot update " + id.path,
                      [&](Statement& s) { s.Bind(1, id.path); });
      !st) {
    return st.error();
  }
  std::optional<int64_t> same_path;
  {
    auto by_path = statements.Get(kImageByPath);
    if (!by_path) return by_path.error();
    ResetOnExit reset(*by_path);
    (*by_path)->Bind(1, id.path);
    if ((*by_path)->Step() == SQLITE_ROW) same_path = (*by_path)->Int(0);
  }
  if (!sop.empty()) {
    std::optional<std::pair<int64_t, std::string>> other;
    {
      auto by_sop = statements.Get(kImageBySop);
      if (!by_sop) return by_sop.error();
      ResetOnExit reset(*by_sop);
      (*by_sop)->Bind(1, sop);
      if ((*by_sop)->Step() == SQLITE_ROW && (!same_path || (*by_sop)->Int(0) != *same_path)) {
        other.emplace((*by_sop)->Int(0), (*by_sop)->Text(1));
      }
    }
    if (other) {
      if (same_path) {
        if (Status st = Run(*this, kDropImage, "cannot update " + id.path,
                            [&](Statement& s) { s.Bind(1, *same_path); });
            !st) {
          return st.error();
        }
      }
      if (Status st = RecordDuplicate(id, sop, other->first, other->second); !st) {
        return st.error();
      }
      return PutOutcome::kDuplicate;
    }
  }
  if (Status st = Run(*this, same_path ? kUpdateImage : kInsertImage,
                      "cannot store the record of " + id.path,
                      [&](Statement& s) {
                        BindRow(s, *this, image, id, NowUtc());
                        if (same_path) s.Bind(kColumnCount + 1, *same_path);
                      });
      !st) {
    return st.error();
  }
  return same_path ? PutOutcome::kReplaced : PutOutcome::kInserted;
}

std::vector<std::string> store_internal::PerRecordQueries() {
  return {kInsertImage, kUpdateImage, kDropNote,  kImageByPath, kImageBySop,
          kDropImage,   kUpsertNote,  kFindImage, kFindNote};
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

Status MigrateStoreFile(const std::filesystem::path& file, int target_version) {
  Database db;
  if (Status s = db.Open(file.string(), SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE); !s) return s;
  if (Status s = db.Exec("PRAGMA journal_mode = WAL"); !s) return s;
  return store_internal::MigrateTo(db, target_version);
}

}  // namespace beamtrim
