// QC records in the audit store: one row per QC exposure with the room (station), the date,
// the headline figures and the full result as JSON, so the tables and the reports can show each
// room's QC history. The table is part of the store schema (migration 3, docs/store.md); the
// file is opened, validated and migrated by Store::Open like any other store access.
#include <nlohmann/json.hpp>

#include "beamtrim/qc.h"
#include "beamtrim/store.h"
#include "beamtrim/version.h"

namespace beamtrim {
namespace {

QcCheckRow ToRow(const QcResult& r) {
  QcCheckRow row;
  row.station = r.station;
  row.check_date = r.date;
  row.image_file = r.image_file;
  row.overall = r.overall;
  row.sid_mm = r.sid_mm;
  row.edge_definition = EdgeDefinitionName(r.edge_definition);
  for (int i = 0; i < 4; ++i) row.misalignment_mm[i] = r.edges[i].misalignment_mm;
  row.width_sum_mm = r.width_axis.value_mm;
  row.length_sum_mm = r.length_axis.value_mm;
  row.centre_mm = r.centre.value_mm;
  row.software_version = kVersion;
  row.result_json = QcToJson(r).dump();
  return row;
}

QcHistoryRow FromRow(const QcCheckRow& row) {
  QcHistoryRow h;
  h.id = row.id;
  h.station = row.station;
  h.date = row.check_date;
  h.overall = row.overall;
  h.sid_mm = row.sid_mm;
  h.width_sum_mm = row.width_sum_mm;
  h.length_sum_mm = row.length_sum_mm;
  h.centre_mm = row.centre_mm;
  h.result_json = row.result_json;
  return h;
}

}  // namespace

Result<int64_t> SaveQcRecord(const std::filesystem::path& store_file, const QcResult& r) {
  auto store = Store::Open(store_file);
  if (!store) return store.error();
  return (*store)->PutQcCheck(ToRow(r));
}

Result<std::vector<QcHistoryRow>> LoadQcHistory(const std::filesystem::path& store_file,
                                                const std::string& station) {
  StoreOptions options;
  options.must_exist = true;  // a missing store is an error, never an empty history
  auto store = Store::Open(store_file, options);
  if (!store) return store.error();
  std::vector<QcHistoryRow> rows;
  Status read = (*store)->ForEachQcCheck(station, "", [&](const QcCheckRow& row) {
    rows.push_back(FromRow(row));
    return true;
  });
  if (!read) return read.error();
  return rows;
}

}  // namespace beamtrim
