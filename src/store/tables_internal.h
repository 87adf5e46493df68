// Shared between tables.cpp and tables_qc.cpp: the per-room clinical counts gathered during the
// tables' single pass over the rows, joined with the rooms' QC records.
#pragma once

#include <map>
#include <string>

#include "beamtrim/tables.h"

namespace beamtrim::store_internal {

struct RoomClinical {
  int64_t images = 0, assessable = 0, review = 0;
  void Add(const ExtractedColumns& v) {
    ++images;
    if (!v.assessable) return;
    ++assessable;
    review += v.outcome == "needs review";
  }
};

// "(unknown)" for an empty Station Name, as in the grouped tables.
std::string RoomLabel(const std::string& station);

// Joins the clinical counts (keyed by RoomLabel) with the QC records dated up to `to_date`.
Result<std::vector<RoomQcHistory>> JoinRoomQc(const Store& store,
                                              const std::map<std::string, RoomClinical>& clinical,
                                              const std::string& to_date);

}  // namespace beamtrim::store_internal
