// `beamtrim qc-field`: light-field / x-ray-field congruence from one QC exposure, stored as a
// QC record for the room, with an optional one-page HTML report.
#include <cstdio>
#include <fstream>
#include <iostream>
#include <memory>
#include <regex>
#include <sstream>
#include <string>

#include <nlohmann/json.hpp>

#include "beamtrim/qc.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

struct QcFieldArgs {
  std::string image;
  std::string light_field;
  std::string indicated_size;
  double sid_mm = 0.0;
  double pixel_mm = 0.0;
  std::string store;
  std::string html;
  std::string json;
  std::string room;
  std::string date;
};

// "150,150,180,180" -> four millimetre values.
bool ParseLightField(const std::string& text, std::array<double, 4>* out) {
  std::stringstream in(text);
  std::string part;
  int i = 0;
  while (std::getline(in, part, ',')) {
    if (i >= 4) return false;
    try {
      size_t used = 0;
      (*out)[i++] = std::stod(part, &used);
      if (used != part.size()) return false;
    } catch (const std::exception&) {
      return false;
    }
  }
  return i == 4;
}

// "300x360", "300x360mm" or "30x36cm" -> [width, height] in mm.
bool ParseSize(const std::string& text, std::array<double, 2>* out) {
  static const std::regex pattern(R"(^\s*([0-9]+(?:\.[0-9]+)?)\s*[xX]\s*([0-9]+(?:\.[0-9]+)?)\s*(mm|cm)?\s*$)");
  std::smatch m;
  if (!std::regex_match(text, m, pattern)) return false;
  double unit = m[3] == "cm" ? 10.0 : 1.0;
  *out = {std::stod(m[1]) * unit, std::stod(m[2]) * unit};
  return (*out)[0] > 0.0 && (*out)[1] > 0.0;
}

int Usage(const std::string& why) {
  std::cerr << "beamtrim qc-field: " << why << "\n";
  return kExitUsage;
}

Status WriteText(const std::string& file, const std::string& text) {
  std::ofstream out(file, std::ios::out | std::ios::trunc | std::ios::binary);
  if (!out) return MakeError(ErrorKind::kUnreadable, file, "cannot open for writing");
  out << text;
  out.close();
  if (!out) return MakeError(ErrorKind::kUnreadable, file, "cannot write");
  return Status::Ok();
}

int RunQcField(const QcFieldArgs& args) {
  QcInputs inputs;
  if (!args.light_field.empty()) {
    std::array<double, 4> lf{};
    if (!ParseLightField(args.light_field, &lf)) {
      return Usage("--light-field needs four distances in mm from the receptor centre: L,R,T,B");
    }
    inputs.light_field_mm = lf;
  }
  if (!args.indicated_size.empty()) {
    std::array<double, 2> size{};
    if (!ParseSize(args.indicated_size, &size)) {
      return Usage("--indicated-size needs WIDTHxHEIGHT in mm (or with a 'cm' suffix), e.g. 350x430");
    }
    inputs.indicated_size_mm = size;
  }
  if (args.sid_mm > 0.0) inputs.sid_mm = args.sid_mm;
  if (args.pixel_mm > 0.0) inputs.pixel_mm = args.pixel_mm;

  auto analysed = AnalyseQcFile(args.image, inputs);
  if (!analysed.ok()) {
    std::cerr << "beamtrim qc-field: " << analysed.error().ToString() << "\n";
    return kExitFailure;
  }
  QcResult& result = analysed->result;
  if (!args.room.empty()) result.station = args.room;
  if (!args.date.empty()) result.date = args.date;
  if (result.station.empty()) {
    result.notes.push_back("no Station Name (0008,1010) in the header and no --room: stored without a room");
  }
  std::cout << QcToText(result);

  auto id = SaveQcRecord(args.store, result);
  if (!id.ok()) {
    std::cerr << "beamtrim qc-field: " << id.error().ToString() << "\n";
    return kExitFailure;
  }
  std::cout << "stored as QC record " << id.value() << " in " << args.store << "\n";
  if (!args.json.empty()) {
    if (Status s = WriteText(args.json, QcToJson(result).dump(2) + "\n"); !s) {
      std::cerr << "beamtrim qc-field: " << s.error().ToString() << "\n";
      return kExitFailure;
    }
  }
  if (!args.html.empty()) {
    auto history = LoadQcHistory(args.store, result.station);
    if (!history.ok()) {
      std::cerr << "beamtrim qc-field: " << history.error().ToString() << "\n";
      return kExitFailure;
    }
    auto html = RenderQcReportHtml(result, analysed->radiograph.pixels, history.value());
    if (!html.ok()) {
      std::cerr << "beamtrim qc-field: " << html.error().ToString() << "\n";
      return kExitFailure;
    }
    if (Status s = WriteText(args.html, html.value()); !s) {
      std::cerr << "beamtrim qc-field: " << s.error().ToString() << "\n";
      return kExitFailure;
    }
    std::cout << "report written to " << args.html << "\n";
  }
  return kExitOk;
}

}  // namespace

void AddQcFieldCommand(CLI::App& app) {
  auto args = std::make_shared<QcFieldArgs>();
  CLI::App* cmd = app.add_subcommand(
      "qc-field",
      "Physicist QC of the beam-limiting device from one test exposure: finds the x-ray field\n"
      "edges and the radio-opaque markers laid at the light-field edges or corners, and reports\n"
      "each edge's misalignment and the 2 % of SID checks (21 CFR 1020.31). The result is stored\n"
      "as a QC record for the room. Local regulations and the physicist's judgement decide.");
  cmd->add_option("image", args->image, "The QC exposure (DICOM DX/CR; raw FOR PROCESSING preferred)")
      ->required();
  cmd->add_option("--light-field", args->light_field,
                  "Light-field edges measured with a ruler: L,R,T,B in mm from the receptor\n"
                  "centre at the detector plane (used instead of markers)");
  cmd->add_option("--indicated-size", args->indicated_size,
                  "Field size indicated on the collimator, WIDTHxHEIGHT in mm (or e.g. 30x36cm)");
  cmd->add_option("--sid-mm", args->sid_mm, "Source-to-image distance when the header has none")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--pixel-mm", args->pixel_mm, "Detector pixel size when the header has none")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--store", args->store, "Audit store file (SQLite) that keeps the QC records")
      ->required();
  cmd->add_option("--html", args->html, "Write the one-page QC report (self-contained HTML)");
  cmd->add_option("--json", args->json, "Write the full result as JSON");
  cmd->add_option("--room", args->room, "Room (station) name when the header has none or to override it");
  cmd->add_option("--date", args->date, "Date YYYYMMDD when the header has none or to override it");
  cmd->callback([args] { ExitCode() = RunQcField(*args); });
}

}  // namespace beamtrim::cli
