// `beamtrim report` end to end: stream the store's records, build the model, render thumbnails
// from the source files, write the HTML files and, where Chromium exists, the PDF sheets.
#include <fcntl.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <fstream>
#include <map>
#include <set>
#include <thread>

#include "beamtrim/dicom.h"
#include "beamtrim/report.h"
#include "beamtrim/store.h"

namespace beamtrim {
namespace {

// The first month of a trend of `months` months ending at `period` (YYYY-MM).
std::string FirstTrendMonth(const std::string& period, int months) {
  int year = std::stoi(period.substr(0, 4)), month = std::stoi(period.substr(5, 2));
  int index = year * 12 + (month - 1) - (months - 1);
  char buf[16];
  std::snprintf(buf, sizeof buf, "%04d-%02d", index / 12, index % 12 + 1);
  return buf;
}

std::string SafeFileStem(const std::string& label) {
  std::string out;
  for (char ch : label) {
    const bool ok = (ch >= 'a' && ch <= 'z') || (ch >= 'A' && ch <= 'Z') || (ch >= '0' && ch <= '9') ||
                    ch == '-' || ch == '_';
    out += ok ? ch : '_';
  }
  return out.empty() ? "unnamed" : out.substr(0, 60);
}

Status WriteText(const std::filesystem::path& file, const std::string& text) {
  return WriteFileBytes(file, std::vector<uint8_t>(text.begin(), text.end()));
}

// Runs a program with arguments, output discarded; kills it after `timeout`.
Result<int> RunQuietly(const std::vector<std::string>& argv, std::chrono::seconds timeout) {
  std::vector<char*> args;
  for (const std::string& a : argv) args.push_back(const_cast<char*>(a.c_str()));
  args.push_back(nullptr);
  const pid_t pid = fork();
  if (pid < 0) return MakeError(ErrorKind::kInternal, argv[0], "cannot start (fork failed)");
  if (pid == 0) {
    const int null = open("/dev/null", O_RDWR);
    if (null >= 0) dup2(null, 0), dup2(null, 1), dup2(null, 2);
    execv(args[0], args.data());
    _exit(127);
  }
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  int status = 0;
  while (waitpid(pid, &status, WNOHANG) == 0) {
    if (std::chrono::steady_clock::now() > deadline) {
      kill(pid, SIGKILL);
      waitpid(pid, &status, 0);
      return MakeError(ErrorKind::kInternal, argv[0], "timed out");
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  return WIFEXITED(status) ? WEXITSTATUS(status) : 128;
}

}  // namespace

void AttachThumbnails(std::vector<CaseSummary>& cases, int width_px) {
  for (CaseSummary& c : cases) {
    c.thumbnail_png.clear();
    Result<Radiograph> radiograph = ReadRadiograph(c.source_file);
    if (!radiograph.ok()) {
      c.thumbnail_note = radiograph.error().kind == ErrorKind::kNotFound
                             ? "the source file is no longer where it was measured"
                             : "the source file could not be read";
      continue;
    }
    OverlayOptions options;
    options.width_px = width_px;
    options.legend = false;
    options.compact_labels = true;
    Result<RgbImage> overlay = RenderOverlay(radiograph->pixels, radiograph->linear, c.record, options);
    if (!overlay.ok()) {
      c.thumbnail_note = "the source file no longer matches the measurement";
      continue;
    }
    Result<std::vector<uint8_t>> png = EncodePng(*overlay);
    if (!png.ok()) {
      c.thumbnail_note = "the picture could not be encoded";
      continue;
    }
    c.thumbnail_png = std::move(*png);
  }
}

Status PrintToPdf(const std::filesystem::path& html, const std::filesystem::path& pdf,
                  const std::filesystem::path& chromium) {
  if (!std::filesystem::exists(chromium)) {
    return MakeError(ErrorKind::kNotFound, chromium.string(), "Chromium is not installed");
  }
  char dir_template[] = "/tmp/beamtrim-chromium-XXXXXX";
  if (mkdtemp(dir_template) == nullptr) {
    return MakeError(ErrorKind::kUnreadable, pdf.string(), "cannot create a temporary profile");
  }
  const std::filesystem::path profile = dir_template;
  std::error_code ec;
  std::filesystem::remove(pdf, ec);
  Result<int> code = RunQuietly(
      {chromium.string(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
       "--no-first-run", "--disable-background-networking", "--disable-component-update",
       "--disable-sync", "--user-data-dir=" + profile.string(),
       "--print-to-pdf=" + std::filesystem::absolute(pdf).string(), "--no-pdf-header-footer",
       "file://" + std::filesystem::absolute(html).string()},
      std::chrono::seconds(120));
  std::filesystem::remove_all(profile, ec);
  if (!code.ok()) return MakeError(ErrorKind::kInternal, pdf.string(), "Chromium " + code.error().reason);
  if (*code != 0 || !std::filesystem::exists(pdf) || std::filesystem::file_size(pdf, ec) == 0) {
    return MakeError(ErrorKind::kInternal, pdf.string(),
                     "Chromium did not write the PDF (exit code " + std::to_string(*code) + ")");
  }
  return Status::Ok();
}

Result<ReportOutcome> WriteReports(const ReportRequest& request) {
  ReportOptions options;
  options.period = request.period;
  if (Status valid = options.Validate(); !valid.ok()) return valid.error();
  if (request.out.empty()) return MakeError(ErrorKind::kInvalidInput, "", "an output file is needed", "--out");
  if (request.pseudonymise && request.key_file.empty()) {
    return MakeError(ErrorKind::kInvalidInput, "", "pseudonyms need a secret key file", "--key-file");
  }
  StoreOptions store_options;
  store_options.must_exist = true;
  store_options.read_only = true;
  auto store = Store::Open(request.store, store_options);  // checks the file and its schema
  if (!store.ok()) return store.error();
  if (request.pseudonymise) {
    auto key = LoadOrCreateKey(request.key_file);
    if (!key.ok()) return key.error();
    options.staff_label = [key = *key](const std::string& name) { return StaffPseudonym(key, name); };
    options.pseudonymised = true;
  }
  ReportBuilder builder(options);
  int64_t unreadable = 0;
  RecordRange range;
  range.from_month = FirstTrendMonth(request.period, options.trend_months);
  range.to_month = request.period;
  Status streamed = (*store)->ForEachRecord(
      range,
      [&builder](const StoredRecord& stored) {
        builder.Add(stored.record);
        return true;
      },
      &unreadable);
  if (!streamed.ok()) return streamed.error();
  ReportModel model = builder.Finish();
  // QC records up to the period's end: the last check before the period applied during it.
  auto qc = BuildRoomQcHistory(**store, request.period.substr(0, 4) + request.period.substr(5, 2) + "01",
                               request.period.substr(0, 4) + request.period.substr(5, 2) + "31");
  if (!qc.ok()) return qc.error();
  model.room_qc = std::move(*qc);

  ReportOutcome outcome;
  outcome.images_in_period = model.department.images;
  if (unreadable > 0) outcome.notes.push_back(std::to_string(unreadable) + " stored records could not be read and were left out");
  AttachThumbnails(model.worst);
  if (Status w = WriteText(request.out, RenderReportHtml(model)); !w.ok()) return w.error();
  outcome.written.push_back(request.out);
  if (request.feedback_dir.empty()) return outcome;

  std::error_code ec;
  std::filesystem::create_directories(request.feedback_dir, ec);
  if (ec) return MakeError(ErrorKind::kUnreadable, request.feedback_dir.string(), "cannot create: " + ec.message());
  const bool pdf = std::filesystem::exists(request.chromium);
  if (!pdf) outcome.notes.push_back("PDF sheets skipped: " + request.chromium.string() + " not found");
  std::set<std::string> used;
  for (RadiographerSheet& sheet : model.sheets) {
    std::string stem = "feedback-" + SafeFileStem(sheet.label);
    for (int k = 2; used.count(stem); ++k) stem = "feedback-" + SafeFileStem(sheet.label) + "-" + std::to_string(k);
    used.insert(stem);
    AttachThumbnails(sheet.cases);
    const std::filesystem::path html = request.feedback_dir / (stem + ".html");
    if (Status w = WriteText(html, RenderFeedbackHtml(model, sheet)); !w.ok()) return w.error();
    outcome.written.push_back(html);
    if (!pdf) continue;
    const std::filesystem::path out_pdf = request.feedback_dir / (stem + ".pdf");
    if (Status p = PrintToPdf(html, out_pdf, request.chromium); p.ok()) {
      outcome.written.push_back(out_pdf);
    } else {
      outcome.notes.push_back("PDF not written: " + p.error().ToString());
    }
  }
  return outcome;
}

}  // namespace beamtrim
