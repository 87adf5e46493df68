// `beamtrim measure`: one JSON Lines record per image, to stdout or a file.
#include <filesystem>
#include <fstream>
#include <iostream>
#include <memory>
#include <string>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/measure.h"
#include "beamtrim/record.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

struct MeasureArgs {
  std::vector<std::string> inputs;
  std::string jsonl;
  std::string rules;
  std::string edge = "half";
};

int RunMeasure(const MeasureArgs& args) {
  MeasureOptions options;
  options.rules_file = args.rules;
  options.field.edge_definition =
      args.edge == "quarter" ? EdgeDefinition::kQuarterMaximum : EdgeDefinition::kHalfTransition;
  Result<Measurer> measurer = Measurer::Create(options);
  if (!measurer.ok()) {
    std::cerr << "beamtrim measure: " << measurer.error().ToString() << "\n";
    return kExitUsage;
  }

  std::vector<std::filesystem::path> paths(args.inputs.begin(), args.inputs.end());
  InputList inputs = FindDicomInputs(paths);
  for (const Error& problem : inputs.problems) {
    std::cerr << "beamtrim measure: " << problem.ToString() << "\n";
  }

  std::ofstream file_out;
  std::ostream* out = &std::cout;
  if (!args.jsonl.empty() && args.jsonl != "-") {
    file_out.open(args.jsonl, std::ios::out | std::ios::trunc);
    if (!file_out) {
      std::cerr << "beamtrim measure: " << args.jsonl << ": cannot open for writing\n";
      return kExitFailure;
    }
    out = &file_out;
  }

  int failed = 0;
  size_t done = 0;
  for (const std::filesystem::path& file : inputs.files) {
    ImageRecord record = measurer->MeasureFile(file);
    if (record.status == RecordStatus::kError) {
      ++failed;
      std::cerr << "beamtrim measure: " << file.string() << ": " << record.reason << "\n";
    }
    *out << ToJsonLine(record) << "\n";
    out->flush();
    if (++done % 50 == 0 && out != &std::cout) {
      std::cerr << "measured " << done << " of " << inputs.files.size() << " images\n";
    }
  }
  if (inputs.files.empty()) {
    std::cerr << "beamtrim measure: no DICOM files found in the given paths\n";
    return kExitFailure;
  }
  return failed == 0 && inputs.problems.empty() ? kExitOk : kExitFailure;
}

}  // namespace

void AddMeasureCommand(CLI::App& app) {
  auto args = std::make_shared<MeasureArgs>();
  CLI::App* cmd = app.add_subcommand(
      "measure",
      "Measure the exposed field (and, where available, anatomy and metrics) of each image\n"
      "and write one JSON object per image (JSON Lines, docs/record.md).");
  cmd->add_option("inputs", args->inputs, "DICOM files, folders (searched recursively) or DICOMDIRs")
      ->required();
  cmd->add_option("--jsonl", args->jsonl, "Write the records to this file (default: stdout)");
  cmd->add_option("--rules", args->rules, "Rules file for the verdicts (default: shipped rules)");
  cmd->add_option("--edge", args->edge,
                  "Edge definition: 'half' (50 % of the local transition, default) or 'quarter'\n"
                  "(one fourth of the maximum exposure, 21 CFR 1020.30(b); linear images only)")
      ->check(CLI::IsMember({"half", "quarter"}));
  cmd->callback([args] { ExitCode() = RunMeasure(*args); });
}

}  // namespace beamtrim::cli
