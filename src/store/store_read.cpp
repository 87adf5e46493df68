// Reading the store: look-ups by path, counts, and the streaming visits used by the tables
// (extracted columns) and the reports (full records).
#include <mutex>

#include <nlohmann/json.hpp>

#include "beamtrim/store.h"
#include "store/sqlite_db.h"
#include "store/store_impl.h"

namespace beamtrim {
namespace {

using store_internal::ResetOnExit;
using store_internal::Statement;

RecordStatus StatusFromName(const std::string& name) {
  if (name == "skipped") return RecordStatus::kSkipped;
  if (name == "error") return RecordStatus::kError;
  return RecordStatus::kOk;
}

using store_internal::kFindImage;
using store_internal::kFindNote;

void ReadRow(const Statement& s, StoredRow& row) {
  row.operator_name = s.Text(0);
  row.station = s.Text(1);
  row.body_part = s.Text(2);
  row.view = s.Text(3);
  row.protocol = s.Text(4);
  row.study_date = s.Text(5);
  row.month = s.Text(6);
  ExtractedColumns& v = row.values;
  v.outcome = s.Text(7);
  v.assessable = s.Int(8) != 0;
  v.all_borders_visible = s.Int(9) != 0;
  v.anatomy_clipped = s.Int(10) != 0;
  v.blanked_or_cropped = s.Int(11) != 0;
  v.excess_fraction = s.Real(12);
  v.excess_area_mm2 = s.Real(13);
  v.excess_area_patient_mm2 = s.Real(14);
  v.kap_dgy_cm2 = s.Real(15);
  v.avoidable_kap_dgy_cm2 = s.Real(16);
}

}  // namespace

Result<std::optional<StoredFile>> Store::Find(const std::string& path) const {
  std::lock_guard lock(impl_->mutex);
  for (bool duplicate : {false, true}) {
    auto s = impl_->statements.Get(duplicate ? kFindNote : kFindImage);
    if (!s) return s.error();
    ResetOnExit reset(*s);
    (*s)->Bind(1, path);
    int code = (*s)->Step();
    if (code == SQLITE_ROW) {
      StoredFile found;
      found.identity = {path, (*s)->Int(0), (*s)->Int(1)};
      found.status = StatusFromName((*s)->Text(2));
      found.duplicate = duplicate;
      return std::optional<StoredFile>(found);
    }
    if (code != SQLITE_DONE) return impl_->db.MakeStoreError(code, "cannot look up " + path);
  }
  return std::optional<StoredFile>();
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
    ReadRow(*s, row);
    if (!visit(row)) return Status::Ok();
  }
  if (code != SQLITE_DONE) return impl_->db.MakeStoreError(code, "cannot read the images");
  return Status::Ok();
}

Status Store::ForEachRecord(const RecordRange& range,
                            const std::function<bool(const StoredRecord&)>& visit,
                            int64_t* unreadable) const {
  std::lock_guard lock(impl_->mutex);
  auto s = impl_->db.Prepare(
      "SELECT file_path, record_json FROM images WHERE status = 'ok' "
      "AND (?1 = '' OR month >= ?1) AND (?2 = '' OR month <= ?2) "
      "AND (?3 = '' OR study_date >= ?3) AND (?4 = '' OR study_date <= ?4) ORDER BY id");
  if (!s) return s.error();
  s->Bind(1, range.from_month).Bind(2, range.to_month);
  s->Bind(3, range.from_date).Bind(4, range.to_date);
  StoredRecord stored;
  int code;
  while ((code = s->Step()) == SQLITE_ROW) {
    nlohmann::json json = nlohmann::json::parse(s->Text(1), nullptr, /*allow_exceptions=*/false);
    Result<ImageRecord> record =
        json.is_discarded() ? Result<ImageRecord>(MakeError(ErrorKind::kStore, "", "bad JSON"))
                            : RecordFromJson(json);
    if (!record) {
      if (unreadable) ++*unreadable;
      continue;
    }
    stored.file_path = s->Text(0);
    stored.record = std::move(*record);
    if (stored.record.file.empty()) stored.record.file = stored.file_path;
    if (!visit(stored)) return Status::Ok();
  }
  if (code != SQLITE_DONE) return impl_->db.MakeStoreError(code, "cannot read the images");
  return Status::Ok();
}

std::string Store::KeyedHash(const std::string& kind, const std::string& value) const {
  return impl_->Hash(kind, value);
}

Result<std::optional<std::string>> Store::RecordJson(const std::string& sop) const {
  std::lock_guard lock(impl_->mutex);
  // The `<> ''` term lets SQLite use the partial index images_sop (see store.cpp).
  auto s = impl_->db.Prepare(
      "SELECT record_json FROM images WHERE sop_instance_uid = ? AND sop_instance_uid <> ''");
  if (!s) return s.error();
  s->Bind(1, sop);
  if (s->Step() == SQLITE_ROW) return std::optional<std::string>(s->Text(0));
  return std::optional<std::string>();
}

}  // namespace beamtrim
