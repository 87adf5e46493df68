// `beamtrim synth-qc`: synthetic QC exposures (markers at a light field offset from the x-ray
// field by known amounts) as DICOM files, with their truth as JSON Lines.
#include <filesystem>
#include <fstream>
#include <iostream>
#include <memory>
#include <string>

#include <nlohmann/json.hpp>

#include "beamtrim/synth_qc.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

struct SynthQcArgs {
  std::string out;
  int count = 1;
  uint64_t seed = 1;
  std::string room = "XR-ROOM-2";
  std::string date = "20260105";
  bool no_sid = false;
  bool declare = false;
};

nlohmann::json TruthJson(const QcExposureSpec& spec, const QcExposure& e, const std::string& file) {
  nlohmann::json j;
  j["file"] = file;
  j["sid_mm"] = spec.sid_mm;
  j["pixel_mm"] = spec.pixel_mm;
  j["linear"] = spec.linear_raw;
  j["marker_kind"] = QcMarkerKindName(spec.kind);
  j["layout"] = spec.layout == QcMarkerLayout::kCorners ? "corners" : "edges";
  nlohmann::json edges = nlohmann::json::array();
  EdgeDefinition def = spec.linear_raw ? EdgeDefinition::kQuarterMaximum : EdgeDefinition::kHalfTransition;
  for (Side s : kAllSides) {
    int i = static_cast<int>(s);
    double xray = QcTruthEdgeMm(spec, s, def);
    edges.push_back({{"side", SideName(s)},
                     {"xray_geometric_mm", e.truth.xray_mm[i]},
                     {"xray_mm", xray},
                     {"edge_definition", EdgeDefinitionName(def)},
                     {"light_mm", e.truth.light_mm[i]},
                     {"misalignment_mm", xray - e.truth.light_mm[i]},
                     {"has_marker", e.truth.edge_has_marker[i]}});
  }
  j["edges"] = edges;
  return j;
}

int RunSynthQc(const SynthQcArgs& args) {
  std::error_code ec;
  std::filesystem::create_directories(args.out, ec);
  if (ec) {
    std::cerr << "beamtrim synth-qc: " << args.out << ": cannot create folder: " << ec.message() << "\n";
    return kExitFailure;
  }
  std::filesystem::path truth_path = std::filesystem::path(args.out) / "qc_truth.jsonl";
  std::ofstream truth(truth_path, std::ios::out | std::ios::trunc);
  if (!truth) {
    std::cerr << "beamtrim synth-qc: " << truth_path.string() << ": cannot open for writing\n";
    return kExitFailure;
  }
  QcDicomInfo info;
  info.station = args.room;
  info.date = args.date;
  info.write_sid = !args.no_sid;
  info.declare_collimator = args.declare;
  for (int i = 0; i < args.count; ++i) {
    QcExposureSpec spec = DrawQcExposureSpec(args.seed, i);
    QcExposure exposure = MakeQcExposure(spec);
    char name[32];
    std::snprintf(name, sizeof name, "qc_%04d.dcm", i + 1);
    std::filesystem::path file = std::filesystem::path(args.out) / name;
    if (Status s = WriteQcExposureDicom(exposure, spec, info, file); !s) {
      std::cerr << "beamtrim synth-qc: " << s.error().ToString() << "\n";
      return kExitFailure;
    }
    truth << TruthJson(spec, exposure, name).dump() << "\n";
  }
  std::cout << "wrote " << args.count << " QC exposure(s) and qc_truth.jsonl to " << args.out << "\n";
  return kExitOk;
}

}  // namespace

void AddSynthQcCommand(CLI::App& app) {
  auto args = std::make_shared<SynthQcArgs>();
  CLI::App* cmd = app.add_subcommand(
      "synth-qc",
      "Write synthetic QC exposures (flat field, metal markers at a light field offset from the\n"
      "x-ray field by known amounts) as DICOM files plus their truth (qc_truth.jsonl). Invented data.");
  cmd->add_option("--out", args->out, "Output folder")->required();
  cmd->add_option("--count", args->count, "Number of exposures")->check(CLI::Range(1, 100000));
  cmd->add_option("--seed", args->seed, "Seed; the same seed gives the same files");
  cmd->add_option("--room", args->room, "Station Name written to the files (fictional)");
  cmd->add_option("--date", args->date, "Study date YYYYMMDD");
  cmd->add_flag("--no-sid", args->no_sid, "Leave Distance Source to Detector out of the header");
  cmd->add_flag("--declare-collimator", args->declare,
                "Write the x-ray field edges as the header's Collimator edges (0018,1702..1708)");
  cmd->callback([args] { ExitCode() = RunSynthQc(*args); });
}

}  // namespace beamtrim::cli
