// `beamtrim scan`: measure every DX/CR image under the given paths into the audit store.
#include <unistd.h>

#include <csignal>
#include <iostream>
#include <memory>
#include <string>
#include <vector>

#include "beamtrim/scan.h"
#include "cli/commands.h"
#include "cli/store_options.h"

namespace beamtrim::cli {
namespace {

struct ScanArgs {
  std::vector<std::string> inputs;
  StoreArgs store;
  std::string rules;
  int threads = 0;
  bool retry_errors = false;
};

std::atomic<bool> g_stop{false};

extern "C" void OnInterrupt(int) { g_stop = true; }

int RunScan(const ScanArgs& args) {
  ScanOptions options;
  options.inputs.assign(args.inputs.begin(), args.inputs.end());
  options.store_file = args.store.store;
  options.key_file = args.store.key_file;
  options.rules_file = args.rules;
  options.threads = args.threads;
  options.retry_errors = args.retry_errors;
  if (Status s = options.Validate(); !s) {
    std::cerr << "beamtrim scan: " << s.error().ToString() << "\n";
    return kExitUsage;
  }
  // Ctrl-C finishes the images in flight and prints the summary; a second one is immediate.
  std::signal(SIGINT, OnInterrupt);
  std::signal(SIGTERM, OnInterrupt);
  ConsoleProgress progress(std::cerr, ::isatty(STDERR_FILENO) == 1);
  auto summary = Scan(options, progress, &g_stop);
  std::signal(SIGINT, SIG_DFL);
  std::signal(SIGTERM, SIG_DFL);
  if (!summary) {
    std::cerr << "beamtrim scan: " << summary.error().ToString() << "\n";
    return summary.error().kind == ErrorKind::kInvalidInput ? kExitUsage : kExitFailure;
  }
  bool clean = !summary->store_error && !summary->stopped && summary->failed == 0 &&
               summary->problems.empty();
  if (summary->files == 0) std::cerr << "beamtrim scan: no DICOM files found in the given paths\n";
  return clean && summary->files > 0 ? kExitOk : kExitFailure;
}

}  // namespace

void AddScanCommand(CLI::App& app) {
  auto args = std::make_shared<ScanArgs>();
  CLI::App* cmd = app.add_subcommand(
      "scan",
      "Measure every DX and CR image under the given paths (folders recursively, DICOMDIRs)\n"
      "in parallel and record each result in an audit store (one SQLite file). A second run\n"
      "skips unchanged files already stored; an interrupted run resumes (docs/store.md).");
  cmd->add_option("inputs", args->inputs, "DICOM files, folders or DICOMDIRs")->required();
  AddStoreOptions(cmd, args->store, StoreUse::kWrite);
  cmd->add_option("--threads", args->threads, "Measuring threads (default: all cores)")
      ->check(CLI::NonNegativeNumber);
  cmd->add_option("--rules", args->rules, "Rules file for the verdicts (default: shipped rules)");
  cmd->add_flag("--retry-errors", args->retry_errors,
                "Measure again unchanged files that failed in an earlier run");
  cmd->callback([args] { ExitCode() = RunScan(*args); });
}

}  // namespace beamtrim::cli
