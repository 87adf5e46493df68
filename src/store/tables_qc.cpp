// Each room's QC history (light field / x-ray field checks) beside its clinical audit figures.
#include <cmath>
#include <map>

#include <nlohmann/json.hpp>

#include "beamtrim/field.h"
#include "beamtrim/tables.h"
#include "store/tables_internal.h"

namespace beamtrim {
namespace {

// The verdict words of one axis check in a stored result (schema beamtrim.qc-field, version 1:
// "checks" holds {name, value_mm, pass}; the axis checks are named "left + right ..." and
// "top + bottom ...").
std::string AxisVerdict(const nlohmann::json& checks, const std::string& name_start) {
  if (!checks.is_array()) return "not assessed";
  for (const nlohmann::json& c : checks) {
    if (!c.is_object() || !c.contains("name") || !c["name"].is_string()) continue;
    if (c["name"].get<std::string>().rfind(name_start, 0) != 0) continue;
    const bool has_value = c.contains("value_mm") && c["value_mm"].is_number();
    if (c.contains("pass") && c["pass"].is_boolean())
      return c["pass"].get<bool>() ? "pass" : "fail";
    return has_value ? "no verdict (SID unknown)" : "not assessed";
  }
  return "not assessed";
}

}  // namespace

namespace store_internal {

std::string RoomLabel(const std::string& station) {
  return station.empty() ? "(unknown)" : station;
}

Result<std::vector<RoomQcHistory>> JoinRoomQc(const Store& store,
                                              const std::map<std::string, RoomClinical>& clinical,
                                              const std::string& to_date) {
  std::map<std::string, RoomQcHistory> rooms;
  for (const auto& [station, c] : clinical) {
    RoomQcHistory& room = rooms[station];
    room.images = c.images;
    room.assessable = c.assessable;
    if (c.assessable > 0) {
      room.pct_needs_review =
          100.0 * static_cast<double>(c.review) / static_cast<double>(c.assessable);
    }
  }
  Status read = store.ForEachQcCheck("", to_date, [&](const QcCheckRow& row) {
    rooms[RoomLabel(row.station)].checks.push_back(SummariseQcCheck(row));
    return true;
  });
  if (!read) return read.error();
  std::vector<RoomQcHistory> out;
  for (auto& [station, room] : rooms) {
    room.station = station;
    out.push_back(std::move(room));
  }
  return out;
}

}  // namespace store_internal

QcHistoryEntry SummariseQcCheck(const QcCheckRow& row) {
  QcHistoryEntry e;
  e.date = row.check_date;
  e.overall = row.overall;
  e.sid_mm = row.sid_mm;
  nlohmann::json json = nlohmann::json::parse(row.result_json, nullptr, false);
  nlohmann::json checks =
      json.is_object() && json.contains("checks") ? json["checks"] : nlohmann::json();
  e.width_axis = AxisVerdict(checks, "left + right");
  e.length_axis = AxisVerdict(checks, "top + bottom");
  for (Side side : kAllSides) {
    const std::optional<double>& mm = row.misalignment_mm[static_cast<int>(side)];
    if (mm && (!e.worst_edge_mm || std::fabs(*mm) > std::fabs(*e.worst_edge_mm))) {
      e.worst_edge_mm = *mm;
      e.worst_edge = SideName(side);
    }
  }
  if (e.worst_edge_mm && e.sid_mm && *e.sid_mm > 0.0) {
    e.worst_edge_pct_sid = 100.0 * std::fabs(*e.worst_edge_mm) / *e.sid_mm;
  }
  return e;
}

Result<std::vector<RoomQcHistory>> BuildRoomQcHistory(const Store& store,
                                                      const std::string& from_date,
                                                      const std::string& to_date) {
  std::map<std::string, store_internal::RoomClinical> clinical;
  Status read = store.ForEachRow(from_date, to_date, [&](const StoredRow& row) {
    clinical[store_internal::RoomLabel(row.station)].Add(row.values);
    return true;
  });
  if (!read) return read.error();
  return store_internal::JoinRoomQc(store, clinical, to_date);
}

}  // namespace beamtrim
