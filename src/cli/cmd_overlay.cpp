// `beamtrim overlay`: one radiograph, measured and drawn with its field, anatomy box, excess
// area, side labels and legend, as a PNG.
#include <cstdio>
#include <iostream>
#include <memory>
#include <string>

#include "beamtrim/dicom.h"
#include "beamtrim/measure.h"
#include "beamtrim/overlay.h"
#include "beamtrim/report.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

struct OverlayArgs {
  std::string input;
  std::string png;
  int width = 1024;
  std::string rules;
};

std::string Title(const ImageRecord& record) {
  std::string title = "Case " + CaseIdFor(record);
  if (record.excess && record.excess->fraction_at_0mm) {
    char buf[64];
    std::snprintf(buf, sizeof buf, "  excess %.0f %% of the field", 100.0 * *record.excess->fraction_at_0mm);
    title += buf;
  }
  if (record.verdict) title += "  (" + record.verdict->outcome + ")";
  return title;
}

int RunOverlay(const OverlayArgs& args) {
  MeasureOptions options;
  options.rules_file = args.rules;
  Result<Measurer> measurer = Measurer::Create(options);
  if (!measurer.ok()) {
    std::cerr << "beamtrim overlay: " << measurer.error().ToString() << "\n";
    return kExitUsage;
  }
  Result<Radiograph> radiograph = ReadRadiograph(args.input, options.read);
  if (!radiograph.ok()) {
    std::cerr << "beamtrim overlay: " << radiograph.error().ToString() << "\n";
    return kExitFailure;
  }
  const ImageRecord record = measurer->MeasureRadiograph(*radiograph);
  OverlayOptions overlay;
  overlay.width_px = args.width;
  overlay.title = Title(record);
  Result<RgbImage> picture = RenderOverlay(radiograph->pixels, radiograph->linear, record, overlay);
  if (!picture.ok()) {
    std::cerr << "beamtrim overlay: " << picture.error().ToString() << "\n";
    return kExitFailure;
  }
  Result<std::vector<uint8_t>> png = EncodePng(*picture);
  Status written = png.ok() ? WriteFileBytes(args.png, *png) : Status(png.error());
  if (!written.ok()) {
    std::cerr << "beamtrim overlay: " << written.error().ToString() << "\n";
    return kExitFailure;
  }
  return kExitOk;
}

}  // namespace

void AddOverlayCommand(CLI::App& app) {
  auto args = std::make_shared<OverlayArgs>();
  CLI::App* cmd = app.add_subcommand(
      "overlay",
      "Measure one radiograph and draw the result on it (PNG): field border per side, anatomy\n"
      "box, excess area hatched, side labels and a legend (docs/report.md).");
  cmd->add_option("file", args->input, "DICOM file")->required();
  cmd->add_option("--png", args->png, "Output PNG file")->required();
  cmd->add_option("--width", args->width, "Width of the picture in pixels (default 1024)")
      ->check(CLI::Range(64, 8192));
  cmd->add_option("--rules", args->rules, "Rules file for the verdict (default: shipped rules)");
  cmd->callback([args] { ExitCode() = RunOverlay(*args); });
}

}  // namespace beamtrim::cli
