// `beamtrim tables`: audit tables and trends from the store, as CSV, JSON or XLSX.
#include <iostream>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "beamtrim/tables.h"
#include "cli/commands.h"
#include "cli/store_options.h"

namespace beamtrim::cli {
namespace {

struct TablesArgs {
  StoreArgs store;
  std::vector<std::string> by;
  std::string from, to;
  std::string format = "csv";
  std::string out;
  int64_t min_n = 20;
  bool pseudonymise = false;
};

// "--by operator --by station,month" -> {{operator}, {station, month}}.
Result<std::vector<std::vector<GroupKey>>> ParseLayouts(const std::vector<std::string>& by) {
  std::vector<std::vector<GroupKey>> layouts;
  for (const std::string& entry : by) {
    std::vector<GroupKey> keys;
    std::stringstream parts(entry);
    for (std::string part; std::getline(parts, part, ',');) {
      auto key = ParseGroupKey(part);
      if (!key) return key.error();
      keys.push_back(*key);
    }
    layouts.push_back(keys);
  }
  if (!layouts.empty()) layouts.insert(layouts.begin(), std::vector<GroupKey>{});
  return layouts;
}

int RunTables(const TablesArgs& args) {
  TableOptions options;
  options.from_date = args.from;
  options.to_date = args.to;
  options.min_n = args.min_n;
  options.pseudonymise = args.pseudonymise;
  options.key_file = args.store.key_file;
  auto layouts = ParseLayouts(args.by);
  auto format = ParseTableFormat(args.format);
  Status valid = !layouts ? Status(layouts.error())
                 : !format ? Status(format.error())
                           : options.Validate();
  if (!valid) {
    std::cerr << "beamtrim tables: " << valid.error().ToString() << "\n";
    return kExitUsage;
  }
  options.tables = *layouts;
  StoreOptions store_options;
  store_options.read_only = true;
  auto store = Store::Open(args.store.store, store_options);
  if (!store) {
    std::cerr << "beamtrim tables: " << store.error().ToString() << "\n";
    return kExitFailure;
  }
  auto tables = BuildAuditTables(**store, options);
  if (!tables) {
    std::cerr << "beamtrim tables: " << tables.error().ToString() << "\n";
    return kExitFailure;
  }
  if (Status s = WriteAuditTables(*tables, *format, args.out); !s) {
    std::cerr << "beamtrim tables: " << s.error().ToString() << "\n";
    return kExitFailure;
  }
  std::cerr << "beamtrim tables: wrote " << tables->tables.size()
            << " tables, the rooms' QC history and the trend to " << args.out << "\n"
            << kTablesCaution << "\n" << kQcCaution << "\n";
  if (!args.pseudonymise) {
    std::cerr << "Radiographers are named: use --pseudonymise before sharing outside the "
                 "department.\n";
  }
  return kExitOk;
}

}  // namespace

void AddTablesCommand(CLI::App& app) {
  auto args = std::make_shared<TablesArgs>();
  CLI::App* cmd = app.add_subcommand(
      "tables",
      "Audit tables from the store: per radiographer, room, exam or month, with the excess\n"
      "exposed area, rule breaches, clipping and avoidable KAP, each room's QC history\n"
      "(light field / x-ray field checks) beside its clinical figures, and monthly trends\n"
      "with p-chart control limits. Dose figures are estimates for quality improvement.");
  AddStoreOptions(cmd, args->store, StoreUse::kReadPseudonymised);
  cmd->add_option("--by", args->by,
                  "Grouping: operator, station, exam (body part + view) or month; repeat for\n"
                  "more tables, join with commas to cross them (operator,month).\n"
                  "Default: overall plus one table per grouping");
  cmd->add_option("--from", args->from, "First study date included (YYYY-MM-DD)");
  cmd->add_option("--to", args->to, "Last study date included (YYYY-MM-DD)");
  cmd->add_option("--format", args->format, "csv (a folder of files), json or xlsx")
      ->check(CLI::IsMember({"csv", "json", "xlsx"}));
  cmd->add_option("--out", args->out, "Output folder (csv) or file (json, xlsx)")->required();
  cmd->add_option("--min-n", args->min_n,
                  "Mark rates of groups with fewer assessable images than this (default 20)");
  cmd->add_flag("--pseudonymise", args->pseudonymise,
                "Replace radiographer names with stable codes (STAFF-XXXXXX)");
  cmd->callback([args] { ExitCode() = RunTables(*args); });
}

}  // namespace beamtrim::cli
