// The QC result as JSON (stored in the QC record and printed by `beamtrim qc-field --json`)
// and as a plain-text table for the terminal.
#include <cstdio>
#include <sstream>

#include <nlohmann/json.hpp>

#include "beamtrim/qc.h"

namespace beamtrim {
namespace {

nlohmann::json Opt(const std::optional<double>& v) {
  return v ? nlohmann::json(*v) : nlohmann::json(nullptr);
}

nlohmann::json CheckJson(const QcCheck& c) {
  nlohmann::json j;
  j["name"] = c.name;
  j["value_mm"] = Opt(c.value_mm);
  j["value_pct_sid"] = Opt(c.value_pct_sid);
  j["limit_mm"] = Opt(c.limit_mm);
  j["pass"] = c.pass ? nlohmann::json(*c.pass) : nlohmann::json(nullptr);
  j["note"] = c.note;
  return j;
}

std::string Mm(const std::optional<double>& v, const char* format = "%.1f") {
  if (!v) return "-";
  char text[32];
  std::snprintf(text, sizeof text, format, *v);
  return text;
}

std::string Verdict(const QcCheck& c) {
  if (!c.value_mm) return "not assessed";
  if (!c.pass) return "no verdict";
  return *c.pass ? "pass" : "FAIL";
}

}  // namespace

nlohmann::json QcToJson(const QcResult& r) {
  nlohmann::json j;
  j["schema"] = "beamtrim.qc-field";
  j["version"] = 1;
  j["station"] = r.station;
  j["date"] = r.date;
  j["image_file"] = r.image_file;
  j["width"] = r.width;
  j["height"] = r.height;
  j["spacing_mm"] = {r.spacing_mm[0], r.spacing_mm[1]};
  j["linear"] = r.linear;
  j["edge_definition"] = EdgeDefinitionName(r.edge_definition);
  j["sid_mm"] = Opt(r.sid_mm);
  j["sid_source"] = r.sid_source;
  nlohmann::json edges = nlohmann::json::array();
  for (const QcEdge& e : r.edges) {
    edges.push_back({{"side", SideName(e.side)},
                     {"xray_mm", Opt(e.xray_mm)},
                     {"light_mm", Opt(e.light_mm)},
                     {"light_source", e.light_source},
                     {"misalignment_mm", Opt(e.misalignment_mm)},
                     {"misalignment_pct_sid", Opt(e.misalignment_pct_sid)},
                     {"declared_mm", Opt(e.declared_mm)},
                     {"declared_deviation_mm", Opt(e.declared_deviation_mm)},
                     {"note", e.note}});
  }
  j["edges"] = edges;
  nlohmann::json markers = nlohmann::json::array();
  for (const QcMarker& m : r.markers) {
    nlohmann::json sides = nlohmann::json::array();
    for (Side s : m.sides) sides.push_back(SideName(s));
    markers.push_back({{"x_px", m.centre_px.x},
                       {"y_px", m.centre_px.y},
                       {"area_mm2", m.area_mm2},
                       {"length_mm", m.length_mm},
                       {"width_mm", m.width_mm},
                       {"elongated", m.elongated},
                       {"placement", QcMarkerPlacementName(m.placement)},
                       {"sides", sides},
                       {"straddles_edge", m.straddles_edge}});
  }
  j["markers"] = markers;
  j["checks"] = {CheckJson(r.width_axis), CheckJson(r.length_axis), CheckJson(r.centre),
                 CheckJson(r.size_width), CheckJson(r.size_height)};
  j["overall"] = r.overall;
  j["notes"] = r.notes;
  return j;
}

std::string QcToText(const QcResult& r) {
  std::ostringstream out;
  out << "QC light field / x-ray field: room " << (r.station.empty() ? "(unknown)" : r.station)
      << ", date " << (r.date.empty() ? "(unknown)" : r.date) << "\n";
  out << "SID: " << (r.sid_mm ? Mm(r.sid_mm, "%.0f") + " mm (" + r.sid_source + ")" : "unknown")
      << "; x-ray edge definition: " << EdgeDefinitionName(r.edge_definition) << "\n\n";
  out << "edge     x-ray mm  light mm  x-ray-light mm  % SID   source\n";
  for (const QcEdge& e : r.edges) {
    char line[160];
    std::snprintf(line, sizeof line, "%-7s  %8s  %8s  %14s  %5s   %s\n", SideName(e.side),
                  Mm(e.xray_mm).c_str(), Mm(e.light_mm).c_str(),
                  Mm(e.misalignment_mm, "%+.1f").c_str(),
                  Mm(e.misalignment_pct_sid, "%+.2f").c_str(),
                  e.light_source.empty() ? "-" : e.light_source.c_str());
    out << line;
  }
  out << "\ncheck                                    value mm  % SID  limit mm  verdict\n";
  for (const QcCheck* c : {&r.width_axis, &r.length_axis, &r.centre, &r.size_width, &r.size_height}) {
    char line[200];
    std::snprintf(line, sizeof line, "%-40s %8s  %5s  %8s  %s\n", c->name.c_str(),
                  Mm(c->value_mm).c_str(), Mm(c->value_pct_sid, "%.2f").c_str(),
                  Mm(c->limit_mm).c_str(), Verdict(*c).c_str());
    out << line;
  }
  bool declared = false;
  for (const QcEdge& e : r.edges) declared = declared || e.declared_mm.has_value();
  if (declared) {
    out << "\nheader collimator edges vs detected x-ray edges (x-ray minus declared, mm):";
    for (const QcEdge& e : r.edges) out << " " << SideName(e.side) << " " << Mm(e.declared_deviation_mm, "%+.1f");
    out << "\n";
  }
  out << "\noverall: " << r.overall << "\n";
  for (const QcEdge& e : r.edges) if (!e.note.empty()) out << "note: " << e.note << "\n";
  for (const std::string& n : r.notes) out << "note: " << n << "\n";
  out << "Limits from 21 CFR 1020.31 (2 % of SID); local regulations and the medical physicist's "
         "judgement decide.\n";
  return out.str();
}

}  // namespace beamtrim
