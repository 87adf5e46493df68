// Subcommands of the `beamtrim` program. Each one registers its options and a callback on the
// CLI11 application; the callback only validates options and calls the library.
#pragma once

#include <CLI/CLI.hpp>

namespace beamtrim::cli {

// Exit codes shared by every subcommand.
inline constexpr int kExitOk = 0;
inline constexpr int kExitFailure = 1;      // the command ran but some inputs failed
inline constexpr int kExitUsage = 2;        // bad options or arguments

// The exit code the program returns; a subcommand's callback sets it.
int& ExitCode();

void AddSynthCommand(CLI::App& app);
void AddMeasureCommand(CLI::App& app);
void AddOverlayCommand(CLI::App& app);
void AddReportCommand(CLI::App& app);
void AddListenCommand(CLI::App& app);
void AddPullCommand(CLI::App& app);
void AddScanCommand(CLI::App& app);
void AddTablesCommand(CLI::App& app);
void AddQcFieldCommand(CLI::App& app);
void AddSynthQcCommand(CLI::App& app);

}  // namespace beamtrim::cli
