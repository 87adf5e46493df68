// `beamtrim report`: the monthly audit report (one self-contained HTML file) and, on request,
// one feedback sheet per radiographer (HTML, plus PDF where Chromium is installed).
#include <iostream>
#include <memory>
#include <string>

#include "beamtrim/report.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

int RunReport(const ReportRequest& request) {
  Result<ReportOutcome> outcome = WriteReports(request);
  if (!outcome.ok()) {
    std::cerr << "beamtrim report: " << outcome.error().ToString() << "\n";
    return outcome.error().kind == ErrorKind::kInvalidInput ? kExitUsage : kExitFailure;
  }
  for (const std::string& note : outcome->notes) std::cerr << "beamtrim report: " << note << "\n";
  std::cerr << "beamtrim report: " << outcome->images_in_period << " images in " << request.period
            << "; wrote " << outcome->written.size() << " files\n";
  for (const auto& file : outcome->written) std::cout << file.string() << "\n";
  return kExitOk;
}

}  // namespace

void AddReportCommand(CLI::App& app) {
  auto request = std::make_shared<ReportRequest>();
  auto store = std::make_shared<std::string>();
  auto out = std::make_shared<std::string>();
  auto key = std::make_shared<std::string>();
  auto feedback = std::make_shared<std::string>();
  CLI::App* cmd = app.add_subcommand(
      "report",
      "Write the monthly collimation audit report as one self-contained HTML file, and\n"
      "optionally one feedback sheet per radiographer (docs/report.md).");
  cmd->add_option("--store", *store, "Audit store (SQLite) written by the scan")->required();
  cmd->add_option("--period", request->period, "Month to report, YYYY-MM")->required();
  cmd->add_option("--out", *out, "Report file (.html)")->required();
  cmd->add_flag("--pseudonymise", request->pseudonymise,
                "Show radiographers as STAFF-XXXXXX codes (keyed hash; needs --key-file)");
  cmd->add_option("--key-file", *key, "Secret key file for the pseudonyms (created when absent)");
  cmd->add_option("--feedback", *feedback, "Folder for one feedback sheet per radiographer");
  cmd->callback([request, store, out, key, feedback] {
    request->store = *store;
    request->out = *out;
    request->key_file = *key;
    request->feedback_dir = *feedback;
    ExitCode() = RunReport(*request);
  });
}

}  // namespace beamtrim::cli
