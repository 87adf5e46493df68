// Reports people read: the monthly audit report (one self-contained HTML file) and one
// feedback sheet per radiographer (HTML, and PDF through a headless Chromium when installed).
// A ReportBuilder aggregates records as they stream past (memory grows with the number of
// groups and the period's images, not with the history); the model it returns is a plain value
// that the HTML writers render. Not synchronised: one builder per thread. docs/report.md
// describes every part and how it is computed.
#pragma once

#include <array>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/overlay.h"
#include "beamtrim/record.h"
#include "beamtrim/status.h"
#include "beamtrim/tables.h"

namespace beamtrim {

// Figures for one set of images (the department, a room, an exam, a radiographer).
struct ReportFigures {
  int64_t images = 0;               // measured images (status ok)
  int64_t assessable = 0;           // with a verdict other than "not assessable"
  int64_t with_field = 0;           // a field was measured
  int64_t all_borders_visible = 0;  // of with_field
  int64_t needs_review = 0;         // of assessable
  int64_t clipped = 0;              // anatomy runs into at least one blade edge
  int64_t masked_or_cropped = 0;    // outside masked or image cut after exposure
  std::array<int64_t, 4> side_without_border{};  // of with_field, by Side: no border, not clipped
  std::optional<double> median_excess;  // fraction of the field, assessable images
  int64_t kap_images = 0;               // assessable images with an avoidable KAP estimate
  double kap_dgy_cm2 = 0.0;             // total recorded KAP of those images
  double avoidable_kap_dgy_cm2 = 0.0;   // their estimated avoidable KAP

  std::optional<double> PercentAssessable() const;
  std::optional<double> PercentAllBordersVisible() const;
  std::optional<double> PercentNeedsReview() const;
};

struct GroupFigures {
  std::string label;  // room, "BODY PART VIEW", or the radiographer's name or pseudonym
  ReportFigures figures;
};

// Monthly trends use TrendPoint and PChart from tables.h: the share of assessable images that
// need review, with 3-sigma p-chart limits around the centre line of the months shown.

// One image shown in a report. `source_file` and `record` are kept only to re-render the
// thumbnail; neither the path nor any UID is ever written to a report.
struct CaseSummary {
  std::string case_id;       // "C-" + 8 hex digits of SHA-256 of the SOP Instance UID
  std::string radiographer;  // label as shown (pseudonym when asked)
  std::string room;
  std::string exam;
  std::string month;
  double excess_fraction = 0.0;
  std::optional<double> avoidable_kap_dgy_cm2;
  std::string outcome;
  std::array<SideState, 4> sides{};
  std::string source_file;
  ImageRecord record;
  std::vector<uint8_t> thumbnail_png;  // filled by AttachThumbnails
  std::string thumbnail_note;          // why there is no thumbnail
};

// The short case number shown for an image: "C-" + 8 upper-case hex digits of SHA-256 of its
// SOP Instance UID (of its file path when the UID is absent). Never reveals either.
std::string CaseIdFor(const ImageRecord& record);

struct RadiographerSheet {
  std::string label;
  ReportFigures figures;
  std::vector<TrendPoint> trend;  // this person's months, limits from their own data
  std::vector<CaseSummary> cases;  // up to ReportOptions::cases_per_sheet, largest excess first
  std::vector<std::string> tips;   // plain language, derived from the figures
};

struct ReportModel {
  std::string period;  // YYYY-MM
  std::string generated_utc;
  std::string software_version;
  bool pseudonymised = false;
  ReportFigures department;
  std::vector<GroupFigures> rooms, exams, radiographers;  // sorted by label
  std::array<int64_t, 20> excess_histogram{};  // assessable images in 5 % bins of the field
  std::vector<TrendPoint> trend;               // department, up to 12 months ending at period
  std::vector<CaseSummary> worst;              // largest excess fraction first
  std::vector<RadiographerSheet> sheets;
  int64_t records_seen = 0;  // all months
  // Each room's QC records up to the end of the period beside its clinical figures of the
  // period (filled by WriteReports from the store; ReportBuilder leaves it empty).
  std::vector<RoomQcHistory> room_qc;
};

struct ReportOptions {
  std::string period;  // YYYY-MM, required
  // Turns an Operators' Name into what the report shows; empty = the name as recorded.
  std::function<std::string(const std::string&)> staff_label;
  bool pseudonymised = false;  // say so in the report
  int worst_cases = 6;         // cases shown with thumbnails in the department report
  int cases_per_sheet = 3;     // on each feedback sheet
  int trend_months = 12;       // months ending at the period
  Status Validate() const;     // period format, counts in range
};

class ReportBuilder {
 public:
  explicit ReportBuilder(ReportOptions options);
  ~ReportBuilder();
  ReportBuilder(ReportBuilder&&) noexcept;
  ReportBuilder& operator=(ReportBuilder&&) noexcept;

  // Any month: the period's images make the figures, earlier months the trend.
  void Add(const ImageRecord& record);
  ReportModel Finish();

 private:
  struct State;
  std::unique_ptr<State> state_;
};

// Reads each case's source DICOM file and renders its overlay thumbnail (PNG, `width_px` wide);
// a file that is gone or unreadable gets a plain note instead. Never fails.
void AttachThumbnails(std::vector<CaseSummary>& cases, int width_px = 360);

// The department report and a feedback sheet as complete, self-contained HTML documents.
std::string RenderReportHtml(const ReportModel& model);
std::string RenderFeedbackHtml(const ReportModel& model, const RadiographerSheet& sheet);

// Prints an HTML file to PDF with a headless Chromium (A4, no header or footer).
// kNotFound when `chromium` does not exist; other errors name the output file.
Status PrintToPdf(const std::filesystem::path& html, const std::filesystem::path& pdf,
                  const std::filesystem::path& chromium = "/usr/bin/chromium");

// Everything `beamtrim report` does.
struct ReportRequest {
  std::filesystem::path store;
  std::string period;
  std::filesystem::path out;           // the department report (.html)
  std::filesystem::path feedback_dir;  // empty = no feedback sheets
  bool pseudonymise = false;
  std::filesystem::path key_file;      // for pseudonyms; empty = the store's key
  std::filesystem::path chromium = "/usr/bin/chromium";
};

struct ReportOutcome {
  int64_t images_in_period = 0;
  std::vector<std::filesystem::path> written;
  std::vector<std::string> notes;  // e.g. "PDF skipped: /usr/bin/chromium not found"
};

// Streams the store's records through a ReportBuilder and writes the files.
Result<ReportOutcome> WriteReports(const ReportRequest& request);

}  // namespace beamtrim
