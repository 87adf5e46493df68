// `beamtrim pull`: fetch the radiographs of a date range from an archive (C-FIND + C-GET, or
// C-MOVE), measure them and record them in the store. Re-running completes an interrupted pull.
#include <csignal>
#include <iostream>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "beamtrim/measure.h"
#include "beamtrim/network.h"
#include "beamtrim/store.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

std::atomic<bool> g_pull_stop{false};

extern "C" void OnPullSignal(int) { g_pull_stop.store(true); }

struct PullArgs {
  std::string archive;
  std::string aet = "BEAMTRIM";
  std::string from;
  std::string to;
  std::string modalities = "DX,CR";
  std::string store;
  std::string spool;
  std::string move_dest;
  int port = 0;
  std::string rules;
};

std::vector<std::string> SplitList(const std::string& text) {
  std::vector<std::string> parts;
  std::stringstream stream(text);
  std::string part;
  while (std::getline(stream, part, ',')) {
    if (!part.empty()) parts.push_back(part);
  }
  return parts;
}

// Turns the arguments into options; prints the error and returns false when they are wrong.
bool BuildOptions(const PullArgs& args, PullOptions* options) {
  Result<ArchiveAddress> archive = ParseArchiveAddress(args.archive);
  Result<std::string> from = ParseDicomDate(args.from);
  Result<std::string> to = ParseDicomDate(args.to);
  for (const Error* error : {archive.ok() ? nullptr : &archive.error(),
                             from.ok() ? nullptr : &from.error(), to.ok() ? nullptr : &to.error()}) {
    if (error) {
      std::cerr << "beamtrim pull: " << error->ToString() << "\n";
      return false;
    }
  }
  options->archive = archive.value();
  options->our_ae = args.aet;
  options->from_date = from.value();
  options->to_date = to.value();
  options->modalities = SplitList(args.modalities);
  options->move_destination = args.move_dest;
  options->move_port = static_cast<uint16_t>(args.port);
  if (!args.move_dest.empty() && args.port == 0) {
    std::cerr << "beamtrim pull: --move-dest needs --port (where the archive sends to)\n";
    return false;
  }
  if (args.move_dest.empty() && args.port != 0) {
    std::cerr << "beamtrim pull: --port is the C-MOVE receiving port and needs --move-dest\n";
    return false;
  }
  return true;
}

int RunPull(const PullArgs& args) {
  PullOptions options;
  if (!BuildOptions(args, &options)) return kExitUsage;
  MeasureOptions measure_options;
  measure_options.rules_file = args.rules;
  Result<Measurer> measurer = Measurer::Create(measure_options);
  if (!measurer.ok()) {
    std::cerr << "beamtrim pull: " << measurer.error().ToString() << "\n";
    return kExitUsage;
  }
  std::string spool_dir = args.spool.empty() ? args.store + ".spool" : args.spool;
  Result<Spool> spool = Spool::Open(spool_dir);
  Result<std::unique_ptr<Store>> store = Store::Open(args.store);
  for (const Error* error : {spool.ok() ? nullptr : &spool.error(),
                             store.ok() ? nullptr : &store.error()}) {
    if (error) {
      std::cerr << "beamtrim pull: " << error->ToString() << "\n";
      return kExitFailure;
    }
  }
  SpoolSink sink = MakeStoreSink(**store, measurer.value());

  std::signal(SIGPIPE, SIG_IGN);
  std::signal(SIGINT, OnPullSignal);
  std::signal(SIGTERM, OnPullSignal);
  Result<PullProgress> result =
      Pull(options, spool.value(), sink, g_pull_stop, [](const PullProgress& p) {
        std::cerr << "studies " << p.studies_done << "/" << p.studies_total << ", images received "
                  << p.images_received << ", already stored " << p.images_skipped << ", failed "
                  << p.images_failed << "\n";
      });
  if (!result.ok()) {
    std::cerr << "beamtrim pull: " << result.error().ToString() << "\n";
    return kExitFailure;
  }
  if (g_pull_stop.load()) {
    std::cerr << "beamtrim pull: interrupted; run the same command again to complete\n";
    return kExitFailure;
  }
  std::cerr << "beamtrim pull: done: " << result->studies_done << " studies, "
            << result->images_received << " images recorded, " << result->images_skipped
            << " already stored, " << result->images_failed << " failed\n";
  return result->images_failed == 0 ? kExitOk : kExitFailure;
}

}  // namespace

void AddPullCommand(CLI::App& app) {
  auto args = std::make_shared<PullArgs>();
  CLI::App* cmd = app.add_subcommand(
      "pull",
      "Fetch the DX/CR images of a study-date range from an archive (Study Root C-FIND, then\n"
      "C-GET, or C-MOVE with --move-dest), measure them and record them in the store. Images\n"
      "already in the store are skipped, so an interrupted pull can simply be run again.\n"
      "See docs/network.md.");
  cmd->add_option("--archive", args->archive, "Archive as HOST:PORT:AET")->required();
  cmd->add_option("--aet", args->aet, "Our AE title (calling AE title)")->required();
  cmd->add_option("--from", args->from, "First study date, YYYY-MM-DD or YYYYMMDD")->required();
  cmd->add_option("--to", args->to, "Last study date (inclusive)")->required();
  cmd->add_option("--modality", args->modalities, "Modalities, comma separated (default DX,CR)");
  cmd->add_option("--store", args->store, "Store file (SQLite)")->required();
  cmd->add_option("--spool", args->spool,
                  "Spool folder for fetched objects (default: <store>.spool; holds patient data)");
  cmd->add_option("--move-dest", args->move_dest,
                  "Use C-MOVE to this AE title (the archive must map it to this host and --port)");
  cmd->add_option("--port", args->port, "Port of the receiving side for C-MOVE")
      ->check(CLI::Range(1, 65535));
  cmd->add_option("--rules", args->rules, "Rules file for the verdicts (default: shipped rules)");
  cmd->callback([args] { ExitCode() = RunPull(*args); });
}

}  // namespace beamtrim::cli
