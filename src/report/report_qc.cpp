// The rooms' QC history in the department report: each room's clinical figures of the period
// beside its latest light field / x-ray field checks, with the caution that people decide.
#include <algorithm>
#include <cstdio>

#include "report/html.h"

namespace beamtrim::report_internal {
namespace {

std::string IsoDate(const std::string& yyyymmdd) {
  if (yyyymmdd.size() != 8) return yyyymmdd.empty() ? "\u2013" : yyyymmdd;
  return yyyymmdd.substr(0, 4) + "-" + yyyymmdd.substr(4, 2) + "-" + yyyymmdd.substr(6, 2);
}

std::string WorstEdge(const QcHistoryEntry& e) {
  if (e.worst_edge.empty() || !e.worst_edge_mm) return "\u2013";
  char text[96];
  if (e.worst_edge_pct_sid) {
    std::snprintf(text, sizeof text, "%s, %.2f %% of SID (%+.1f mm)", e.worst_edge.c_str(),
                  *e.worst_edge_pct_sid, *e.worst_edge_mm);
  } else {
    std::snprintf(text, sizeof text, "%s, %+.1f mm (SID unknown)", e.worst_edge.c_str(),
                  *e.worst_edge_mm);
  }
  return text;
}

}  // namespace

std::string RoomQcTable(const std::vector<RoomQcHistory>& rooms, size_t max_checks) {
  std::string s =
      "<h3 id=\"room-qc-h\">Rooms: clinical audit beside the QC of the beam-limiting device</h3>\n"
      "<p>Light field / x-ray field checks stored with <code>beamtrim qc-field</code>, up to the "
      "end of the period, newest first. Per axis the two opposite edges' misalignments are added "
      "and compared with 2&nbsp;% of SID.</p>\n";
  if (rooms.empty()) return s + "<p>No rooms in the store for this period.</p>\n";
  s += "<table>\n<caption>Rooms: clinical figures of the period and QC history</caption>\n"
       "<thead><tr><th scope=\"col\" class=\"l\">Room</th><th scope=\"col\">Images</th>"
       "<th scope=\"col\">Needs review</th><th scope=\"col\">QC date</th>"
       "<th scope=\"col\">QC overall</th><th scope=\"col\">Left + right</th>"
       "<th scope=\"col\">Top + bottom</th><th scope=\"col\">Worst "
       "edge</th></tr></thead>\n<tbody>\n";
  for (const RoomQcHistory& room : rooms) {
    const size_t shown = std::min(room.checks.size(), max_checks);
    const size_t span = std::max<size_t>(shown, 1);
    s += "<tr><th scope=\"row\" rowspan=\"" + std::to_string(span) + "\">" + Escape(room.station) +
         "</th><td rowspan=\"" + std::to_string(span) + "\">" + Count(room.images) +
         "</td><td rowspan=\"" + std::to_string(span) + "\">" + Pct(room.pct_needs_review) +
         "</td>";
    if (shown == 0) {
      s += "<td colspan=\"5\" class=\"l\">no QC record in the store</td></tr>\n";
      continue;
    }
    for (size_t i = 0; i < shown; ++i) {
      const QcHistoryEntry& e = room.checks[room.checks.size() - 1 - i];  // newest first
      if (i > 0) s += "<tr>";
      s += "<td>" + Escape(IsoDate(e.date)) + "</td><td>" + Escape(e.overall) + "</td><td>" +
           Escape(e.width_axis) + "</td><td>" + Escape(e.length_axis) + "</td><td>" +
           Escape(WorstEdge(e)) + "</td></tr>\n";
    }
  }
  s += "</tbody>\n</table>\n";
  bool more = false;
  for (const RoomQcHistory& room : rooms) more = more || room.checks.size() > max_checks;
  if (more) {
    s += "<p class=\"meta\">Only the latest " + std::to_string(max_checks) +
         " QC records of a room are shown; <code>beamtrim tables</code> lists them all.</p>\n";
  }
  return s + "<p class=\"meta\">" + Escape(kQcCaution) + "</p>\n";
}

}  // namespace beamtrim::report_internal
