// JSON form of ImageRecord. Key names are the public contract in docs/record.md: never rename
// a key without bumping kRecordVersion.
#include <nlohmann/json.hpp>

#include "beamtrim/record.h"
#include "beamtrim/version.h"

namespace beamtrim {
namespace {

using nlohmann::json;

template <class T>
json Opt(const std::optional<T>& v) {
  return v ? json(*v) : json(nullptr);
}

json PointJson(Point2d p) { return json::array({p.x, p.y}); }

json PolygonJson(const Polygon& polygon) {
  json out = json::array();
  for (const Point2d& p : polygon) out.push_back(PointJson(p));
  return out;
}

json SideListJson(const std::vector<Side>& sides) {
  json out = json::array();
  for (Side s : sides) out.push_back(SideName(s));
  return out;
}

json PerSideJson(const std::array<std::optional<double>, 4>& values) {
  json out = json::object();
  for (Side s : kAllSides) out[SideName(s)] = Opt(values[static_cast<int>(s)]);
  return out;
}

json FieldJson(const FieldMeasurement& f) {
  json sides = json::array();
  for (const SideMeasurement& s : f.sides) {
    json line = nullptr;
    if (s.line_px) line = json::array({PointJson(s.line_px->a), PointJson(s.line_px->b)});
    json side = {{"name", SideName(s.side)},
                 {"visible", s.visible},
                 {"confidence", s.confidence},
                 {"line_px", line},
                 {"contrast_ratio", s.contrast_ratio},
                 {"penumbra_px", Opt(s.penumbra_px)}};
    if (!s.reason.empty()) side["reason"] = s.reason;
    sides.push_back(side);
  }
  return {{"polygon_px", PolygonJson(f.polygon_px)},
          {"area_px", f.area_px},
          {"area_mm2", Opt(f.area_mm2)},
          {"rotation_deg", f.rotation_deg},
          {"sides", sides},
          {"open", f.open},
          {"blanked", f.blanked},
          {"cropped", f.cropped},
          {"not_assessable_sides", SideListJson(f.blanked_or_cropped_sides)},
          {"double_exposure", f.double_exposure},
          {"confidence", f.confidence},
          {"edge_definition", EdgeDefinitionName(f.edge_definition)},
          {"notes", f.notes}};
}

json AnatomyJson(const AnatomyMeasurement& a) {
  json box = nullptr;
  if (a.box_px) {
    box = json::array();
    for (const Point2d& p : *a.box_px) box.push_back(PointJson(p));
  }
  return {{"found", a.found},
          {"box_px", box},
          {"hull_px", PolygonJson(a.hull_px)},
          {"area_mm2", Opt(a.area_mm2)},
          {"clipped_sides", SideListJson(a.clipped_sides)},
          {"at_blade_sides", SideListJson(a.at_blade_sides)},
          {"ends", a.ends ? SideListJson({(*a.ends)[0], (*a.ends)[1]}) : json(nullptr)},
          {"continuing_end", a.continuing_end ? json(SideName(*a.continuing_end)) : json(nullptr)}};
}

json ExcessJson(const ExcessMeasurement& e) {
  return {{"area_mm2", Opt(e.area_mm2)},
          {"area_cm2", e.area_mm2 ? json(*e.area_mm2 / 100.0) : json(nullptr)},
          {"area_patient_mm2", Opt(e.area_patient_mm2)},
          {"fraction_at_0mm", Opt(e.fraction_at_0mm)},
          {"fraction_at_margin", Opt(e.fraction_at_margin)},
          {"margin_mm", e.margin_mm},
          {"per_side_mm", PerSideJson(e.per_side_mm)},
          {"per_side_patient_mm", PerSideJson(e.per_side_patient_mm)}};
}

json ReceptorJson(const ReceptorMeasurement& r) {
  json assessable = json::object();
  for (Side s : kAllSides) assessable[SideName(s)] = r.assessable[static_cast<int>(s)];
  return {{"active_mm", Opt(r.active_mm)},
          {"image_mm", Opt(r.image_mm)},
          {"field_mm", Opt(r.field_mm)},
          {"field_fraction_of_image", Opt(r.field_fraction_of_image)},
          {"assessable", assessable},
          {"centre_offset_mm", Opt(r.centre_offset_mm)},
          {"centre_offset_pct_sid", Opt(r.centre_offset_pct_sid)},
          {"size_difference_pct_sid", Opt(r.size_difference_pct_sid)},
          {"pbl_within_limits", Opt(r.pbl_within_limits)}};
}

json DeclaredJson(const DeclaredComparison& d) {
  json edges = json::array();
  for (const DeclaredEdgeDeviation& e : d.edges) {
    edges.push_back({{"side", SideName(e.side)},
                     {"deviation_mm", e.deviation_mm},
                     {"deviation_pct_sid", Opt(e.deviation_pct_sid)},
                     {"beyond_limit", e.beyond_limit}});
  }
  return {{"source", d.source.empty() ? json(nullptr) : json(d.source)}, {"edges", edges}};
}

json DoseJson(const DoseMeasurement& d) {
  return {{"kap_dgy_cm2", Opt(d.kap_dgy_cm2)},
          {"avoidable_kap_dgy_cm2", Opt(d.avoidable_kap_dgy_cm2)},
          {"exposure_index", Opt(d.exposure_index)},
          {"target_exposure_index", Opt(d.target_exposure_index)},
          {"deviation_index", Opt(d.deviation_index)},
          {"deviation_index_computed", d.deviation_index_computed},
          {"deviation_index_range", d.deviation_index_range}};
}

json VerdictJson(const Verdict& v) {
  return {{"outcome", v.outcome}, {"rule", v.rule}, {"reasons", v.reasons}};
}

json ContextJson(const RecordContext& c) {
  return {{"modality", c.modality},
          {"presentation_intent", c.presentation_intent},
          {"photometric", c.photometric},
          {"operator", c.operator_name},
          {"station", c.station},
          {"body_part", c.body_part},
          {"view", c.view},
          {"protocol", c.protocol},
          {"study_date", c.study_date},
          {"month", c.month},
          {"sid_mm", Opt(c.sid_mm)},
          {"source_patient_mm", Opt(c.source_patient_mm)},
          {"magnification", Opt(c.magnification)},
          {"linear", c.linear},
          {"transfer_syntax", c.transfer_syntax}};
}

// ---- parsing ---------------------------------------------------------------------------

// Thrown inside the parser only; turned into an Error naming the key at the boundary.
struct KeyError {
  std::string key;
  std::string reason;
};

const json& Need(const json& j, const char* key) {
  if (!j.is_object() || !j.contains(key)) throw KeyError{key, "missing"};
  return j.at(key);
}

template <class T>
std::optional<T> GetOpt(const json& j, const char* key) {
  if (!j.is_object() || !j.contains(key) || j.at(key).is_null()) return std::nullopt;
  try {
    return j.at(key).get<T>();
  } catch (const json::exception&) {
    throw KeyError{key, "has the wrong type"};
  }
}

template <class T>
T Get(const json& j, const char* key, T fallback) {
  return GetOpt<T>(j, key).value_or(fallback);
}

Point2d ParsePoint(const json& j) {
  if (!j.is_array() || j.size() != 2) throw KeyError{"point", "is not [x, y]"};
  return {j[0].get<double>(), j[1].get<double>()};
}

Polygon ParsePolygon(const json& j) {
  Polygon out;
  if (j.is_null()) return out;
  for (const json& p : j) out.push_back(ParsePoint(p));
  return out;
}

Side ParseSide(const std::string& name) {
  for (Side s : kAllSides) {
    if (name == SideName(s)) return s;
  }
  throw KeyError{"side", "unknown side name '" + name + "'"};
}

std::vector<Side> ParseSideList(const json& j) {
  std::vector<Side> out;
  if (j.is_array()) {
    for (const json& s : j) out.push_back(ParseSide(s.get<std::string>()));
  }
  return out;
}

std::array<std::optional<double>, 4> ParsePerSide(const json& j) {
  std::array<std::optional<double>, 4> out;
  for (Side s : kAllSides) out[static_cast<int>(s)] = GetOpt<double>(j, SideName(s));
  return out;
}

FieldMeasurement ParseField(const json& j) {
  FieldMeasurement f;
  f.polygon_px = ParsePolygon(Need(j, "polygon_px"));
  f.area_px = Get<double>(j, "area_px", Area(f.polygon_px));
  f.area_mm2 = GetOpt<double>(j, "area_mm2");
  f.rotation_deg = Get<double>(j, "rotation_deg", 0.0);
  f.open = Get<bool>(j, "open", false);
  f.blanked = Get<bool>(j, "blanked", false);
  f.cropped = Get<bool>(j, "cropped", false);
  f.double_exposure = Get<bool>(j, "double_exposure", false);
  f.confidence = Get<double>(j, "confidence", 0.0);
  if (j.contains("not_assessable_sides")) {
    f.blanked_or_cropped_sides = ParseSideList(j.at("not_assessable_sides"));
  }
  std::string def = Get<std::string>(j, "edge_definition", "half-transition");
  f.edge_definition = def == EdgeDefinitionName(EdgeDefinition::kQuarterMaximum)
                          ? EdgeDefinition::kQuarterMaximum
                          : EdgeDefinition::kHalfTransition;
  f.notes = Get<std::vector<std::string>>(j, "notes", {});
  for (const json& s : Need(j, "sides")) {
    Side side = ParseSide(Need(s, "name").get<std::string>());
    SideMeasurement& m = f.side(side);
    m.side = side;
    m.visible = Get<bool>(s, "visible", false);
    m.confidence = Get<double>(s, "confidence", 0.0);
    m.contrast_ratio = Get<double>(s, "contrast_ratio", 0.0);
    m.penumbra_px = GetOpt<double>(s, "penumbra_px");
    m.reason = Get<std::string>(s, "reason", "");
    if (s.contains("line_px") && !s.at("line_px").is_null()) {
      const json& l = s.at("line_px");
      m.line_px = Segment{ParsePoint(l.at(0)), ParsePoint(l.at(1))};
    }
  }
  return f;
}

AnatomyMeasurement ParseAnatomy(const json& j) {
  AnatomyMeasurement a;
  a.found = Get<bool>(j, "found", false);
  if (j.contains("box_px") && !j.at("box_px").is_null()) {
    Polygon box = ParsePolygon(j.at("box_px"));
    if (box.size() != 4) throw KeyError{"box_px", "does not have 4 corners"};
    a.box_px = std::array<Point2d, 4>{box[0], box[1], box[2], box[3]};
  }
  if (j.contains("hull_px")) a.hull_px = ParsePolygon(j.at("hull_px"));
  a.area_mm2 = GetOpt<double>(j, "area_mm2");
  if (j.contains("clipped_sides")) a.clipped_sides = ParseSideList(j.at("clipped_sides"));
  if (j.contains("at_blade_sides")) a.at_blade_sides = ParseSideList(j.at("at_blade_sides"));
  if (j.contains("ends") && !j.at("ends").is_null()) {
    const std::vector<Side> ends = ParseSideList(j.at("ends"));
    if (ends.size() != 2) throw KeyError{"ends", "does not name 2 sides"};
    a.ends = std::array<Side, 2>{ends[0], ends[1]};
  }
  if (j.contains("continuing_end") && !j.at("continuing_end").is_null()) {
    const std::vector<Side> end = ParseSideList(json::array({j.at("continuing_end")}));
    a.continuing_end = end.front();
  }
  return a;
}

ExcessMeasurement ParseExcess(const json& j) {
  ExcessMeasurement e;
  e.area_mm2 = GetOpt<double>(j, "area_mm2");
  e.area_patient_mm2 = GetOpt<double>(j, "area_patient_mm2");
  e.fraction_at_0mm = GetOpt<double>(j, "fraction_at_0mm");
  e.fraction_at_margin = GetOpt<double>(j, "fraction_at_margin");
  e.margin_mm = Get<double>(j, "margin_mm", 0.0);
  if (j.contains("per_side_mm")) e.per_side_mm = ParsePerSide(j.at("per_side_mm"));
  if (j.contains("per_side_patient_mm")) {
    e.per_side_patient_mm = ParsePerSide(j.at("per_side_patient_mm"));
  }
  return e;
}

ReceptorMeasurement ParseReceptor(const json& j) {
  ReceptorMeasurement r;
  r.active_mm = GetOpt<std::array<double, 2>>(j, "active_mm");
  r.image_mm = GetOpt<std::array<double, 2>>(j, "image_mm");
  r.field_mm = GetOpt<std::array<double, 2>>(j, "field_mm");
  r.field_fraction_of_image = GetOpt<double>(j, "field_fraction_of_image");
  if (j.contains("assessable")) {
    for (Side s : kAllSides) {
      r.assessable[static_cast<int>(s)] = Get<bool>(j.at("assessable"), SideName(s), false);
    }
  }
  r.centre_offset_mm = GetOpt<double>(j, "centre_offset_mm");
  r.centre_offset_pct_sid = GetOpt<double>(j, "centre_offset_pct_sid");
  r.size_difference_pct_sid = GetOpt<double>(j, "size_difference_pct_sid");
  r.pbl_within_limits = GetOpt<bool>(j, "pbl_within_limits");
  return r;
}

DeclaredComparison ParseDeclared(const json& j) {
  DeclaredComparison d;
  d.source = Get<std::string>(j, "source", "");
  if (j.contains("edges")) {
    for (const json& e : j.at("edges")) {
      DeclaredEdgeDeviation dev;
      dev.side = ParseSide(Need(e, "side").get<std::string>());
      dev.deviation_mm = Get<double>(e, "deviation_mm", 0.0);
      dev.deviation_pct_sid = GetOpt<double>(e, "deviation_pct_sid");
      dev.beyond_limit = Get<bool>(e, "beyond_limit", false);
      d.edges.push_back(dev);
    }
  }
  return d;
}

DoseMeasurement ParseDose(const json& j) {
  DoseMeasurement d;
  d.kap_dgy_cm2 = GetOpt<double>(j, "kap_dgy_cm2");
  d.avoidable_kap_dgy_cm2 = GetOpt<double>(j, "avoidable_kap_dgy_cm2");
  d.exposure_index = GetOpt<double>(j, "exposure_index");
  d.target_exposure_index = GetOpt<double>(j, "target_exposure_index");
  d.deviation_index = GetOpt<double>(j, "deviation_index");
  d.deviation_index_computed = Get<bool>(j, "deviation_index_computed", false);
  d.deviation_index_range = Get<std::string>(j, "deviation_index_range", "");
  return d;
}

Verdict ParseVerdict(const json& j) {
  Verdict v;
  v.outcome = Get<std::string>(j, "outcome", "");
  v.rule = Get<std::string>(j, "rule", "");
  v.reasons = Get<std::vector<std::string>>(j, "reasons", {});
  return v;
}

RecordContext ParseContext(const json& j) {
  RecordContext c;
  c.modality = Get<std::string>(j, "modality", "");
  c.presentation_intent = Get<std::string>(j, "presentation_intent", "");
  c.photometric = Get<std::string>(j, "photometric", "");
  c.operator_name = Get<std::string>(j, "operator", "");
  c.station = Get<std::string>(j, "station", "");
  c.body_part = Get<std::string>(j, "body_part", "");
  c.view = Get<std::string>(j, "view", "");
  c.protocol = Get<std::string>(j, "protocol", "");
  c.study_date = Get<std::string>(j, "study_date", "");
  c.month = Get<std::string>(j, "month", "");
  c.sid_mm = GetOpt<double>(j, "sid_mm");
  c.source_patient_mm = GetOpt<double>(j, "source_patient_mm");
  c.magnification = GetOpt<double>(j, "magnification");
  c.linear = Get<bool>(j, "linear", false);
  c.transfer_syntax = Get<std::string>(j, "transfer_syntax", "");
  return c;
}

template <class T, class F>
void ParseSection(const json& j, const char* key, std::optional<T>* out, F parse) {
  if (!j.contains(key) || j.at(key).is_null()) return;
  try {
    *out = parse(j.at(key));
  } catch (KeyError& e) {
    e.key = std::string(key) + "." + e.key;
    throw;
  }
}

}  // namespace

const char* RecordStatusName(RecordStatus status) {
  switch (status) {
    case RecordStatus::kOk: return "ok";
    case RecordStatus::kSkipped: return "skipped";
    case RecordStatus::kError: return "error";
  }
  return "error";
}

json ToJson(const ImageRecord& r) {
  json j = {{"schema", kRecordSchema},
            {"version", kRecordVersion},
            {"software_version", r.software_version.empty() ? kVersion : r.software_version},
            {"file", r.file},
            {"sop_instance_uid", r.sop_instance_uid},
            {"status", RecordStatusName(r.status)}};
  if (r.status != RecordStatus::kOk || !r.reason.empty()) j["reason"] = r.reason;
  j["rows"] = r.rows;
  j["columns"] = r.columns;
  j["pixel_spacing_mm"] = Opt(r.pixel_spacing_mm);
  j["context"] = ContextJson(r.context);
  j["field"] = r.field ? FieldJson(*r.field) : json(nullptr);
  j["anatomy"] = r.anatomy ? AnatomyJson(*r.anatomy) : json(nullptr);
  j["excess"] = r.excess ? ExcessJson(*r.excess) : json(nullptr);
  j["receptor"] = r.receptor ? ReceptorJson(*r.receptor) : json(nullptr);
  j["declared"] = r.declared ? DeclaredJson(*r.declared) : json(nullptr);
  j["dose"] = r.dose ? DoseJson(*r.dose) : json(nullptr);
  j["verdict"] = r.verdict ? VerdictJson(*r.verdict) : json(nullptr);
  j["notes"] = r.notes;
  return j;
}

std::string ToJsonLine(const ImageRecord& record) { return ToJson(record).dump(); }

Result<ImageRecord> RecordFromJson(const json& j) {
  try {
    ImageRecord r;
    if (Get<std::string>(j, "schema", "") != kRecordSchema) {
      return MakeError(ErrorKind::kMalformed, "", "not a beamtrim image record", "schema");
    }
    if (Get<int>(j, "version", 0) > kRecordVersion) {
      return MakeError(ErrorKind::kUnsupported, "",
                       "record version is newer than this beamtrim understands", "version");
    }
    r.software_version = Get<std::string>(j, "software_version", "");
    r.file = Get<std::string>(j, "file", "");
    r.sop_instance_uid = Get<std::string>(j, "sop_instance_uid", "");
    std::string status = Get<std::string>(j, "status", "error");
    r.status = status == "ok" ? RecordStatus::kOk
               : status == "skipped" ? RecordStatus::kSkipped
                                     : RecordStatus::kError;
    r.reason = Get<std::string>(j, "reason", "");
    r.rows = Get<int>(j, "rows", 0);
    r.columns = Get<int>(j, "columns", 0);
    r.pixel_spacing_mm = GetOpt<std::array<double, 2>>(j, "pixel_spacing_mm");
    if (j.contains("context")) r.context = ParseContext(j.at("context"));
    ParseSection(j, "field", &r.field, ParseField);
    ParseSection(j, "anatomy", &r.anatomy, ParseAnatomy);
    ParseSection(j, "excess", &r.excess, ParseExcess);
    ParseSection(j, "receptor", &r.receptor, ParseReceptor);
    ParseSection(j, "declared", &r.declared, ParseDeclared);
    ParseSection(j, "dose", &r.dose, ParseDose);
    ParseSection(j, "verdict", &r.verdict, ParseVerdict);
    r.notes = Get<std::vector<std::string>>(j, "notes", {});
    return r;
  } catch (const KeyError& e) {
    return MakeError(ErrorKind::kMalformed, "", e.reason, e.key);
  } catch (const json::exception& e) {
    return MakeError(ErrorKind::kMalformed, "", e.what());
  }
}

}  // namespace beamtrim
