// Writing audit tables: a neutral sheet form first, then CSV (RFC 4180), JSON or XLSX.
#include <cmath>
#include <cstdio>
#include <fstream>
#include <variant>

#include <nlohmann/json.hpp>
#include <xlsxwriter.h>

#include "beamtrim/tables.h"
#include "beamtrim/version.h"

namespace beamtrim {
namespace {

using Cell = std::variant<std::monostate, std::string, double, int64_t, bool>;

struct Column {
  std::string key;    // machine name (JSON key)
  std::string label;  // header for people, with the unit
};

struct Sheet {
  std::string name;
  std::string caution = kTablesCaution;  // first line of the sheet
  std::vector<Column> columns;
  std::vector<std::vector<Cell>> rows;
  std::vector<bool> small;  // per row: rates unreliable (marked in XLSX)
};

Column KeyColumn(GroupKey k) {
  switch (k) {
    case GroupKey::kOperator: return {"radiographer", "radiographer (Operators' Name)"};
    case GroupKey::kStation: return {"room", "room (Station Name)"};
    case GroupKey::kExam: return {"exam", "exam (body part and view)"};
    case GroupKey::kMonth: return {"month", "month (YYYY-MM, study date)"};
  }
  return {"group", "group"};
}

Cell Opt(const std::optional<double>& v) { return v ? Cell(*v) : Cell(); }

Sheet TableSheet(const AuditTable& table, int64_t min_n) {
  Sheet sheet;
  sheet.name = table.name;
  for (GroupKey k : table.keys) sheet.columns.push_back(KeyColumn(k));
  std::vector<Column> stats = {
      {"images", "images (n)"},
      {"assessable", "assessable images (n)"},
      {"excess_fraction_median", "excess fraction, median (0 mm margin, of field area)"},
      {"excess_fraction_q1", "excess fraction, lower quartile"},
      {"excess_fraction_q3", "excess fraction, upper quartile"},
      {"excess_fraction_iqr", "excess fraction, interquartile range"},
      {"all_borders_visible_pct", "all four borders visible (% of images)"},
      {"needs_review_pct", "breaking the rule, needs review (% of assessable)"},
      {"anatomy_clipped_pct", "anatomy clipped (% of assessable)"},
      {"blanked_or_cropped_pct", "blanked or cropped, not assessable (% of images)"},
      {"excess_area_detector_cm2", "excess area at the detector (cm2, total)"},
      {"excess_area_patient_cm2", "excess area at the patient plane (cm2, total)"},
      {"kap_dgy_cm2", "KAP (dGy*cm2, total)"},
      {"avoidable_kap_dgy_cm2", "avoidable KAP (dGy*cm2, total, estimate)"},
      {"small_group", "fewer than " + std::to_string(min_n) + " assessable images: rates unreliable"},
  };
  sheet.columns.insert(sheet.columns.end(), stats.begin(), stats.end());
  for (const GroupStats& s : table.rows) {
    std::vector<Cell> row(s.keys.begin(), s.keys.end());
    std::optional<double> iqr;
    if (s.excess_q1 && s.excess_q3) iqr = *s.excess_q3 - *s.excess_q1;
    std::vector<Cell> values = {
        s.images, s.assessable, Opt(s.excess_median), Opt(s.excess_q1), Opt(s.excess_q3),
        Opt(iqr), Opt(s.pct_all_borders_visible), Opt(s.pct_needs_review),
        Opt(s.pct_anatomy_clipped), Opt(s.pct_blanked_or_cropped), s.excess_area_cm2,
        s.excess_area_patient_cm2, s.kap_dgy_cm2, s.avoidable_kap_dgy_cm2, s.small_group};
    row.insert(row.end(), values.begin(), values.end());
    sheet.rows.push_back(std::move(row));
    sheet.small.push_back(s.small_group);
  }
  return sheet;
}

Sheet TrendSheet(const std::vector<TrendSeries>& trend) {
  Sheet sheet;
  sheet.name = "trend";
  sheet.columns = {
      {"dimension", "per (radiographer or room)"},
      {"group", "radiographer or room"},
      {"month", "month (YYYY-MM)"},
      {"assessable", "assessable images (n)"},
      {"needs_review", "needs review (n)"},
      {"rate", "needs-review rate (fraction)"},
      {"centre", "p-chart centre line p-bar (fraction)"},
      {"lcl", "lower control limit (fraction)"},
      {"ucl", "upper control limit (fraction)"},
      {"out_of_control", "outside the control limits"},
  };
  for (const TrendSeries& s : trend) {
    std::string dimension = s.by == GroupKey::kOperator ? "radiographer" : "room";
    for (const TrendPoint& p : s.points) {
      sheet.rows.push_back({dimension, s.group, p.month, p.n, p.nonconforming, p.rate,
                            p.limits.centre, p.limits.lower, p.limits.upper, p.out_of_control});
      sheet.small.push_back(false);
    }
  }
  return sheet;
}

// One row per QC record of each room, the room's clinical figures repeated beside each; a room
// without any QC record gets one row that says so.
Sheet QcSheet(const std::vector<RoomQcHistory>& rooms) {
  Sheet sheet;
  sheet.name = "qc-history";
  sheet.caution = std::string(kQcCaution) + " " + kTablesCaution;
  sheet.columns = {
      {"room", "room (Station Name)"},
      {"images", "clinical images in the period (n)"},
      {"needs_review_pct", "clinical: needs review (% of assessable)"},
      {"qc_date", "QC exposure date (YYYYMMDD)"},
      {"qc_overall", "QC overall (pass, fail, incomplete)"},
      {"width_axis", "left + right misalignment vs 2 % of SID"},
      {"length_axis", "top + bottom misalignment vs 2 % of SID"},
      {"worst_edge", "edge with the largest misalignment"},
      {"worst_edge_mm", "its misalignment, x-ray minus light (mm, detector plane)"},
      {"worst_edge_pct_sid", "its misalignment (% of SID)"},
      {"sid_mm", "SID (mm)"},
  };
  for (const RoomQcHistory& room : rooms) {
    std::vector<Cell> clinical = {room.station, room.images, Opt(room.pct_needs_review)};
    if (room.checks.empty()) {
      std::vector<Cell> row = clinical;
      row.insert(row.end(), {Cell(), std::string("no QC record in the store"), Cell(), Cell(),
                             Cell(), Cell(), Cell(), Cell()});
      sheet.rows.push_back(std::move(row));
      sheet.small.push_back(false);
    }
    for (const QcHistoryEntry& e : room.checks) {
      std::vector<Cell> row = clinical;
      row.insert(row.end(), {e.date, e.overall, e.width_axis, e.length_axis,
                             e.worst_edge.empty() ? Cell() : Cell(e.worst_edge),
                             Opt(e.worst_edge_mm), Opt(e.worst_edge_pct_sid), Opt(e.sid_mm)});
      sheet.rows.push_back(std::move(row));
      sheet.small.push_back(false);
    }
  }
  return sheet;
}

std::vector<Sheet> MakeSheets(const AuditTables& tables) {
  std::vector<Sheet> sheets;
  for (const AuditTable& t : tables.tables) sheets.push_back(TableSheet(t, tables.min_n));
  sheets.push_back(QcSheet(tables.qc));
  sheets.push_back(TrendSheet(tables.trend));
  return sheets;
}

std::string NumberText(double v) {
  char text[64];
  std::snprintf(text, sizeof text, "%.10g", v);
  return text;
}

std::string CellText(const Cell& cell) {
  if (auto* s = std::get_if<std::string>(&cell)) return *s;
  if (auto* d = std::get_if<double>(&cell)) return NumberText(*d);
  if (auto* i = std::get_if<int64_t>(&cell)) return std::to_string(*i);
  if (auto* b = std::get_if<bool>(&cell)) return *b ? "yes" : "no";
  return {};
}

// RFC 4180: quote fields holding a comma, quote, CR or LF; double inner quotes; CRLF ends.
std::string CsvField(const std::string& text) {
  if (text.find_first_of(",\"\r\n") == std::string::npos) return text;
  std::string out = "\"";
  for (char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  return out + "\"";
}

Status WriteCsv(const std::vector<Sheet>& sheets, const std::filesystem::path& folder) {
  std::error_code ec;
  std::filesystem::create_directories(folder, ec);
  if (ec) {
    return MakeError(ErrorKind::kUnreadable, folder.string(),
                     "cannot create the output folder: " + ec.message());
  }
  for (const Sheet& sheet : sheets) {
    auto file = folder / (sheet.name + ".csv");
    std::ofstream out(file, std::ios::binary | std::ios::trunc);
    out << CsvField(sheet.caution) << "\r\n";
    for (size_t c = 0; c < sheet.columns.size(); ++c) {
      out << (c ? "," : "") << CsvField(sheet.columns[c].label);
    }
    out << "\r\n";
    for (const auto& row : sheet.rows) {
      for (size_t c = 0; c < row.size(); ++c) out << (c ? "," : "") << CsvField(CellText(row[c]));
      out << "\r\n";
    }
    out.close();
    if (!out) return MakeError(ErrorKind::kUnreadable, file.string(), "cannot write the table");
  }
  return Status::Ok();
}

nlohmann::json CellJson(const Cell& cell) {
  if (auto* s = std::get_if<std::string>(&cell)) return *s;
  if (auto* d = std::get_if<double>(&cell)) return *d;
  if (auto* i = std::get_if<int64_t>(&cell)) return *i;
  if (auto* b = std::get_if<bool>(&cell)) return *b;
  return nullptr;
}

Status WriteJson(const AuditTables& tables, const std::vector<Sheet>& sheets,
                 const std::filesystem::path& file) {
  nlohmann::json doc = {{"schema", "beamtrim.audit-tables"},
                        {"version", 1},
                        {"software_version", kVersion},
                        {"caution", kTablesCaution},
                        {"from_date", tables.from_date},
                        {"to_date", tables.to_date},
                        {"min_n", tables.min_n},
                        {"pseudonymised", tables.pseudonymised},
                        {"tables", nlohmann::json::array()}};
  for (const Sheet& sheet : sheets) {
    nlohmann::json columns = nlohmann::json::array(), rows = nlohmann::json::array();
    for (const Column& c : sheet.columns) columns.push_back({{"key", c.key}, {"label", c.label}});
    for (const auto& row : sheet.rows) {
      nlohmann::json object = nlohmann::json::object();
      for (size_t c = 0; c < row.size(); ++c) object[sheet.columns[c].key] = CellJson(row[c]);
      rows.push_back(std::move(object));
    }
    nlohmann::json table = {{"name", sheet.name}, {"columns", columns}, {"rows", rows}};
    if (sheet.caution != kTablesCaution) table["caution"] = sheet.caution;
    doc["tables"].push_back(std::move(table));
  }
  std::ofstream out(file, std::ios::binary | std::ios::trunc);
  out << doc.dump(2) << "\n";
  out.close();
  if (!out) return MakeError(ErrorKind::kUnreadable, file.string(), "cannot write the tables");
  return Status::Ok();
}

void WriteXlsxSheet(lxw_workbook* book, const Sheet& sheet, lxw_format* bold,
                    lxw_format* caution, lxw_format* marked) {
  // Sheet names are limited to 31 characters in the XLSX format.
  lxw_worksheet* ws = workbook_add_worksheet(book, sheet.name.substr(0, 31).c_str());
  worksheet_write_string(ws, 0, 0, sheet.caution.c_str(), caution);
  lxw_row_t header = 2;
  for (size_t c = 0; c < sheet.columns.size(); ++c) {
    worksheet_write_string(ws, header, static_cast<lxw_col_t>(c), sheet.columns[c].label.c_str(),
                           bold);
  }
  for (size_t r = 0; r < sheet.rows.size(); ++r) {
    auto row = static_cast<lxw_row_t>(header + 1 + r);
    lxw_format* format = sheet.small[r] ? marked : nullptr;
    for (size_t c = 0; c < sheet.rows[r].size(); ++c) {
      const Cell& cell = sheet.rows[r][c];
      auto col = static_cast<lxw_col_t>(c);
      if (auto* d = std::get_if<double>(&cell)) {
        worksheet_write_number(ws, row, col, *d, format);
      } else if (auto* i = std::get_if<int64_t>(&cell)) {
        worksheet_write_number(ws, row, col, static_cast<double>(*i), format);
      } else if (!std::holds_alternative<std::monostate>(cell)) {
        worksheet_write_string(ws, row, col, CellText(cell).c_str(), format);
      }
    }
  }
  worksheet_set_column(ws, 0, static_cast<lxw_col_t>(sheet.columns.size()), 18, nullptr);
  worksheet_freeze_panes(ws, header + 1, 0);
}

Status WriteXlsx(const std::vector<Sheet>& sheets, const std::filesystem::path& file) {
  lxw_workbook* book = workbook_new(file.c_str());
  if (!book) return MakeError(ErrorKind::kUnreadable, file.string(), "cannot create the workbook");
  lxw_format* bold = workbook_add_format(book);
  format_set_bold(bold);
  format_set_text_wrap(bold);
  lxw_format* caution = workbook_add_format(book);
  format_set_italic(caution);
  lxw_format* marked = workbook_add_format(book);
  format_set_italic(marked);
  format_set_font_color(marked, LXW_COLOR_GRAY);
  for (const Sheet& sheet : sheets) WriteXlsxSheet(book, sheet, bold, caution, marked);
  lxw_error error = workbook_close(book);
  if (error != LXW_NO_ERROR) {
    return MakeError(ErrorKind::kUnreadable, file.string(),
                     std::string("cannot write the workbook: ") + lxw_strerror(error));
  }
  return Status::Ok();
}

}  // namespace

Status WriteAuditTables(const AuditTables& tables, TableFormat format,
                        const std::filesystem::path& out) {
  std::vector<Sheet> sheets = MakeSheets(tables);
  switch (format) {
    case TableFormat::kCsv: return WriteCsv(sheets, out);
    case TableFormat::kJson: return WriteJson(tables, sheets, out);
    case TableFormat::kXlsx: return WriteXlsx(sheets, out);
  }
  return MakeError(ErrorKind::kInternal, out.string(), "unknown table format");
}

}  // namespace beamtrim
