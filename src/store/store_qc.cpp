// QC records of the rooms' beam-limiting devices (table qc_field_checks, schema version 3).
// The store keeps the rows; the QC layer computes them (src/qc/qc_store.cpp).
#include <mutex>

#include "beamtrim/store.h"
#include "beamtrim/version.h"
#include "store/sqlite_db.h"
#include "store/store_impl.h"

namespace beamtrim {

using store_internal::Transaction;

Result<int64_t> Store::PutQcCheck(const QcCheckRow& r) {
  std::lock_guard lock(impl_->mutex);
  Transaction transaction(impl_->db);
  if (Status s = transaction.Begin(); !s) return s.error();
  auto insert = impl_->db.Prepare(
      "INSERT INTO qc_field_checks (station, check_date, image_file, overall, sid_mm, "
      "edge_definition, left_mm, right_mm, top_mm, bottom_mm, width_sum_mm, length_sum_mm, "
      "centre_mm, software_version, result_json, stored_utc) "
      "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
  if (!insert) return insert.error();
  insert->Bind(1, r.station).Bind(2, r.check_date).Bind(3, r.image_file).Bind(4, r.overall);
  insert->Bind(5, r.sid_mm).Bind(6, r.edge_definition);
  for (int i = 0; i < 4; ++i) insert->Bind(7 + i, r.misalignment_mm[i]);
  insert->Bind(11, r.width_sum_mm).Bind(12, r.length_sum_mm).Bind(13, r.centre_mm);
  insert->Bind(14, r.software_version.empty() ? std::string(kVersion) : r.software_version);
  insert->Bind(15, r.result_json).Bind(16, store_internal::NowUtc());
  if (int code = insert->Step(); code != SQLITE_DONE) {
    return impl_->db.MakeStoreError(code, "cannot store the QC record");
  }
  int64_t id = sqlite3_last_insert_rowid(impl_->db.handle());
  if (Status s = transaction.Commit(); !s) return s.error();
  return id;
}

Status Store::ForEachQcCheck(const std::string& station, const std::string& to_date,
                             const std::function<bool(const QcCheckRow&)>& visit) const {
  std::lock_guard lock(impl_->mutex);
  auto q = impl_->db.Prepare(
      "SELECT id, station, check_date, image_file, overall, sid_mm, edge_definition, left_mm, "
      "right_mm, top_mm, bottom_mm, width_sum_mm, length_sum_mm, centre_mm, software_version, "
      "result_json, stored_utc FROM qc_field_checks WHERE (?1 = '' OR station = ?1) "
      "AND (?2 = '' OR check_date <= ?2) ORDER BY check_date, id");
  if (!q) return q.error();
  q->Bind(1, station).Bind(2, to_date);
  QcCheckRow row;
  int code;
  while ((code = q->Step()) == SQLITE_ROW) {
    row.id = q->Int(0);
    row.station = q->Text(1);
    row.check_date = q->Text(2);
    row.image_file = q->Text(3);
    row.overall = q->Text(4);
    row.sid_mm = q->Real(5);
    row.edge_definition = q->Text(6);
    for (int i = 0; i < 4; ++i) row.misalignment_mm[i] = q->Real(7 + i);
    row.width_sum_mm = q->Real(11);
    row.length_sum_mm = q->Real(12);
    row.centre_mm = q->Real(13);
    row.software_version = q->Text(14);
    row.result_json = q->Text(15);
    row.stored_utc = q->Text(16);
    if (!visit(row)) return Status::Ok();
  }
  if (code != SQLITE_DONE) return impl_->db.MakeStoreError(code, "cannot read the QC records");
  return Status::Ok();
}

}  // namespace beamtrim
