// The `beamtrim` program: parse the command line and hand over to one subcommand.
#include <iostream>

#include <CLI/CLI.hpp>

#include "beamtrim/version.h"
#include "cli/commands.h"

namespace beamtrim::cli {
int& ExitCode() {
  static int code = kExitOk;
  return code;
}
}  // namespace beamtrim::cli

int main(int argc, char** argv) {
  CLI::App app{
      "beamtrim measures X-ray beam collimation on delivered radiographs (DICOM DX/CR):\n"
      "it finds the exposed field in the pixels, the anatomy inside it, and reports the\n"
      "unnecessary exposed area per image and per radiographer, room, exam and month.\n"
      "Findings are for quality improvement; local regulations, the department's protocols\n"
      "and the medical physicist take precedence.",
      "beamtrim"};
  app.set_version_flag("--version", std::string("beamtrim ") + beamtrim::kVersion);
  app.require_subcommand(1);
  app.fallthrough(false);

  beamtrim::cli::AddSynthCommand(app);
  beamtrim::cli::AddMeasureCommand(app);
  beamtrim::cli::AddOverlayCommand(app);
  beamtrim::cli::AddReportCommand(app);
  beamtrim::cli::AddListenCommand(app);
  beamtrim::cli::AddPullCommand(app);
  beamtrim::cli::AddScanCommand(app);
  beamtrim::cli::AddTablesCommand(app);
  beamtrim::cli::AddQcFieldCommand(app);
  beamtrim::cli::AddSynthQcCommand(app);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    int code = app.exit(e);
    return code == 0 ? 0 : beamtrim::cli::kExitUsage;
  }
  return beamtrim::cli::ExitCode();
}
