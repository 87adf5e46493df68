// `beamtrim listen`: receive radiographs from modalities (DICOM Storage SCP), measure each one
// and record it in the store. Runs until SIGINT or SIGTERM.
#include <csignal>
#include <iostream>
#include <memory>
#include <string>
#include <vector>

#include "beamtrim/measure.h"
#include "beamtrim/network.h"
#include "beamtrim/store.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

std::atomic<bool> g_listen_stop{false};

extern "C" void OnListenSignal(int) { g_listen_stop.store(true); }

struct ListenArgs {
  ListenOptions options;
  int port = 11112;
  std::string store;
  std::string spool;
  std::string rules;
};

int RunListen(ListenArgs& args) {
  args.options.port = static_cast<uint16_t>(args.port);
  if (Status valid = ValidateListenOptions(args.options); !valid.ok()) {
    std::cerr << "beamtrim listen: " << valid.error().ToString() << "\n";
    return kExitUsage;
  }
  MeasureOptions measure_options;
  measure_options.rules_file = args.rules;
  Result<Measurer> measurer = Measurer::Create(measure_options);
  if (!measurer.ok()) {
    std::cerr << "beamtrim listen: " << measurer.error().ToString() << "\n";
    return kExitUsage;
  }
  Result<Spool> spool = Spool::Open(args.spool);
  if (!spool.ok()) {
    std::cerr << "beamtrim listen: " << spool.error().ToString() << "\n";
    return kExitFailure;
  }
  Result<std::unique_ptr<Store>> store = Store::Open(args.store);
  if (!store.ok()) {
    std::cerr << "beamtrim listen: " << store.error().ToString() << "\n";
    return kExitFailure;
  }
  SpoolSink sink = MakeStoreSink(**store, measurer.value());

  std::signal(SIGPIPE, SIG_IGN);  // a peer that vanishes must not end the program
  std::signal(SIGINT, OnListenSignal);
  std::signal(SIGTERM, OnListenSignal);
  Result<ListenSummary> summary = RunStorageServer(args.options, spool.value(), sink,
                                                   g_listen_stop, [&] {
    std::cerr << "beamtrim listen: AE " << args.options.ae_title << " ready on port "
              << args.options.port << "\n";
  });
  if (!summary.ok()) {
    std::cerr << "beamtrim listen: " << summary.error().ToString() << "\n";
    return kExitFailure;
  }
  std::cerr << "beamtrim listen: stopped; associations accepted " << summary->associations_accepted
            << ", refused " << summary->associations_refused << "; objects received "
            << summary->objects_received << ", failed " << summary->objects_failed
            << ", recorded " << summary->objects_consumed << ", not recorded "
            << summary->consume_failures << "\n";
  return summary->consume_failures == 0 ? kExitOk : kExitFailure;
}

}  // namespace

void AddListenCommand(CLI::App& app) {
  auto args = std::make_shared<ListenArgs>();
  CLI::App* cmd = app.add_subcommand(
      "listen",
      "Receive DX/CR images from modalities or an archive (DICOM Storage SCP, C-ECHO too),\n"
      "keep each in the spool folder, measure it and record it in the store. Stops cleanly on\n"
      "SIGINT/SIGTERM; anything received but not yet measured is measured on the next start.\n"
      "See docs/network.md.");
  cmd->add_option("--port", args->port, "TCP port to listen on")
      ->check(CLI::Range(1, 65535))
      ->required();
  cmd->add_option("--aet", args->options.ae_title, "Our AE title (called AE title)")->required();
  cmd->add_option("--store", args->store, "Store file (SQLite) to record measurements in")
      ->required();
  cmd->add_option("--spool", args->spool,
                  "Spool folder for received objects (holds patient data: protect it)")
      ->required();
  cmd->add_option("--allow", args->options.allowed_calling_aets,
                  "Calling AE title allowed to send (repeatable; default: any)");
  cmd->add_option("--max-associations", args->options.max_associations,
                  "Concurrent associations; more are refused for now (default 4)");
  cmd->add_option("--dimse-timeout", args->options.dimse_timeout_s,
                  "Seconds an association may stay idle (default 60)");
  cmd->add_option("--rules", args->rules, "Rules file for the verdicts (default: shipped rules)");
  cmd->callback([args] { ExitCode() = RunListen(*args); });
}

}  // namespace beamtrim::cli
