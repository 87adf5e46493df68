// Audit tables: per-group figures (radiographer, room, exam, month) and monthly trends with
// p-chart limits, computed from the Store in one streaming pass, and written as CSV, JSON or
// XLSX. Pure functions over a Store; results are value types owned by the caller.
// Definitions of every column and of the quantiles: docs/store.md, "Audit tables".
#pragma once

#include <array>
#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/status.h"
#include "beamtrim/store.h"

namespace beamtrim {

// Shown with every table: the figures support coaching and quality improvement only.
inline constexpr const char* kTablesCaution =
    "Caution: dose figures are estimates for quality improvement, not patient dose records. "
    "Findings about a person are for coaching, reviewed by a qualified person. Local "
    "regulations, department protocols and the medical physicist take precedence.";

// Shown with every QC history: the verdicts apply the US limits; people decide.
inline constexpr const char* kQcCaution =
    "Caution: QC verdicts apply the 2 % of SID limits of US 21 CFR 1020.31 (light field vs "
    "x-ray field, summed per axis). Local regulations, the department's QC protocol and the "
    "medical physicist's judgement decide whether a room's beam-limiting device is acceptable.";

enum class GroupKey { kOperator, kStation, kExam, kMonth };
const char* GroupKeyName(GroupKey key);  // "operator", "station", "exam", "month"
Result<GroupKey> ParseGroupKey(const std::string& name);

struct TableOptions {
  // One table per entry, grouped by all keys of the entry together (e.g. {operator, month}).
  // Empty = an overall table plus one table per key.
  std::vector<std::vector<GroupKey>> tables;
  std::string from_date;  // inclusive, YYYY-MM-DD or YYYYMMDD; empty = from the first image
  std::string to_date;    // inclusive; empty = to the last image
  // Groups with fewer assessable images than this have their rates marked as unreliable
  // (common practice, no single source: departments choose their own minimum).
  int64_t min_n = 20;
  bool pseudonymise = false;        // radiographer names become STAFF-XXXXXX codes
  std::filesystem::path key_file;   // secret key for the codes; required to pseudonymise

  Status Validate() const;  // errors name the option
};

// Linear-interpolation quantile of sorted values: Hyndman & Fan (1996) definition 7, the
// default of R and of Excel PERCENTILE.INC. `sorted` must be non-empty and ascending.
double Quantile(const std::vector<double>& sorted, double p);

struct GroupStats {
  std::vector<std::string> keys;  // one per GroupKey of the table
  int64_t images = 0;             // status ok
  int64_t assessable = 0;         // a verdict other than "not assessable"
  // Excess fraction at 0 mm margin over assessable images that have one.
  int64_t with_excess = 0;
  std::optional<double> excess_median, excess_q1, excess_q3;
  std::optional<double> pct_all_borders_visible;  // of images
  std::optional<double> pct_needs_review;         // of assessable
  std::optional<double> pct_anatomy_clipped;      // of assessable
  std::optional<double> pct_blanked_or_cropped;   // of images
  double excess_area_cm2 = 0.0;          // detector plane, sum over assessable images
  double excess_area_patient_cm2 = 0.0;  // patient plane
  double kap_dgy_cm2 = 0.0;              // sum over images with a KAP in the header
  double avoidable_kap_dgy_cm2 = 0.0;    // estimate, uniform field assumed
  bool small_group = false;              // assessable < min_n: rates unreliable
};

struct AuditTable {
  std::string name;             // "overall", "by-operator", "by-operator-month", ...
  std::vector<GroupKey> keys;
  std::vector<GroupStats> rows;  // sorted by keys
};

// p-chart (Montgomery, Introduction to Statistical Quality Control, "control chart for
// fraction nonconforming", variable sample size): centre p̄, limits p̄ ± 3 sqrt(p̄(1-p̄)/n),
// clipped to [0, 1].
struct PChartLimits {
  double centre = 0.0;
  double lower = 0.0;
  double upper = 0.0;
};
PChartLimits PChart(double p_bar, int64_t n);

// One month of one radiographer or room; nonconforming = verdict "needs review".
struct TrendPoint {
  std::string month;
  int64_t n = 0;  // assessable images
  int64_t nonconforming = 0;
  double rate = 0.0;
  PChartLimits limits;
  bool out_of_control = false;  // rate outside [lower, upper]
};
struct TrendSeries {
  GroupKey by = GroupKey::kOperator;  // kOperator or kStation
  std::string group;
  double centre = 0.0;  // p̄ = total nonconforming / total n of this group
  std::vector<TrendPoint> points;  // by month
};

// One QC exposure of a room as the tables and the report show it.
struct QcHistoryEntry {
  std::string date;     // YYYYMMDD of the exposure
  std::string overall;  // "pass", "fail", "incomplete"
  std::optional<double> sid_mm;
  // Per axis, as the QC analysis decided it: "pass", "fail", "no verdict (SID unknown)" or
  // "not assessed". Width = left + right edges, length = top + bottom (21 CFR 1020.31(d)).
  std::string width_axis, length_axis;
  // The edge with the largest misalignment magnitude (x-ray minus light field).
  std::string worst_edge;                  // "left", "right", "top", "bottom"; empty = none
  std::optional<double> worst_edge_mm;     // signed, mm at the detector plane
  std::optional<double> worst_edge_pct_sid;  // |mm| / SID x 100; empty without SID
};

// A room's clinical audit figures of the period beside its QC records up to the period's end.
struct RoomQcHistory {
  std::string station;                 // "(unknown)" when not recorded
  int64_t images = 0;                  // clinical images of the period (status ok)
  int64_t assessable = 0;
  std::optional<double> pct_needs_review;  // of assessable
  std::vector<QcHistoryEntry> checks;      // oldest first; empty = no QC record
};

// Every room with clinical images in [from_date, to_date] or a QC record dated on or before
// `to_date` (YYYYMMDD; empty = open end), sorted by room. QC records of every date up to the end
// are kept: the last check before the period is the one that applied during it.
Result<std::vector<RoomQcHistory>> BuildRoomQcHistory(const Store& store,
                                                      const std::string& from_date,
                                                      const std::string& to_date);

// The QcHistoryEntry for one stored QC record: axis verdicts read from its result JSON, the
// worst edge from its per-edge columns.
QcHistoryEntry SummariseQcCheck(const QcCheckRow& row);

struct AuditTables {
  std::vector<AuditTable> tables;
  std::vector<RoomQcHistory> qc;  // each room's QC history beside its clinical figures
  std::vector<TrendSeries> trend;  // per radiographer, then per room
  std::string from_date, to_date;  // as applied, YYYYMMDD or empty
  int64_t min_n = 0;
  bool pseudonymised = false;
};

// Computes every table and the trend in one pass over the store (memory: per group).
Result<AuditTables> BuildAuditTables(const Store& store, const TableOptions& options);

// Monthly p-chart series for radiographers (kOperator) or rooms (kStation); the HTML report
// uses this too. Months with no assessable image are left out.
Result<std::vector<TrendSeries>> BuildTrend(const Store& store, GroupKey by,
                                            const TableOptions& options);

enum class TableFormat { kCsv, kJson, kXlsx };
Result<TableFormat> ParseTableFormat(const std::string& name);

// CSV: `out` is a folder, one RFC 4180 file per table plus qc-history.csv and trend.csv; the
// first record of each file is the caution. JSON: one file. XLSX: one workbook, one sheet per table.
// Column headers carry the units. Errors name the output path.
Status WriteAuditTables(const AuditTables& tables, TableFormat format,
                        const std::filesystem::path& out);

}  // namespace beamtrim
