// `beamtrim synth`: write synthetic radiographs (DICOM) with their exact truth records.
#include <iostream>
#include <memory>
#include <string>

#include "beamtrim/dicom_writer.h"
#include "beamtrim/synth.h"
#include "cli/commands.h"

namespace beamtrim::cli {
namespace {

struct SynthArgs {
  std::string out;
  int count = 100;
  uint64_t seed = 1;
  double pixel_mm = 0.5;
  bool full_size = false;
  std::string situation = "any";
  std::string syntax = "mixed";
  std::string output = "mixed";
  std::string body_part;
  bool clinic = false;
  bool png = false;
  bool noiseless = false;
  int threads = 0;
};

std::string Names(const std::vector<std::string>& names) {
  std::string out;
  for (const std::string& n : names) out += (out.empty() ? "" : ", ") + n;
  return out;
}

std::vector<std::string> SituationNames() {
  std::vector<std::string> out{"any"};
  for (SynthSituation s : AllSynthSituations()) out.push_back(SynthSituationName(s));
  return out;
}

std::vector<std::string> SyntaxNames() {
  std::vector<std::string> out{"mixed"};
  for (TransferSyntax t : AllTransferSyntaxes()) out.push_back(TransferSyntaxName(t));
  return out;
}

std::vector<std::string> BodyPartNames() {
  std::vector<std::string> out;
  for (SynthBodyPart p : AllSynthBodyParts()) out.push_back(SynthBodyPartName(p));
  return out;
}

// Fills the library options; false (with a message) on a bad value.
bool ToOptions(const SynthArgs& a, SynthBatchOptions& o) {
  o.out_dir = a.out;
  o.count = a.count;
  o.seed = a.seed;
  o.clinic = a.clinic;
  o.threads = a.threads;
  o.write_png = a.png;
  o.image.pixel_mm = a.full_size ? 0.15 : a.pixel_mm;
  o.image.noise = !a.noiseless;
  auto situation = ParseSynthSituation(a.situation);
  if (!situation) {
    std::cerr << "beamtrim synth: --situation: unknown '" << a.situation << "'; one of "
              << Names(SituationNames()) << "\n";
    return false;
  }
  o.image.situation = *situation;
  if (a.syntax != "mixed") {
    bool found = false;
    for (TransferSyntax t : AllTransferSyntaxes()) {
      if (a.syntax == TransferSyntaxName(t)) {
        o.image.syntax = t;
        found = true;
      }
    }
    if (!found) {
      std::cerr << "beamtrim synth: --syntax: unknown '" << a.syntax << "'; one of "
                << Names(SyntaxNames()) << "\n";
      return false;
    }
  }
  if (!a.body_part.empty()) {
    for (SynthBodyPart p : AllSynthBodyParts()) {
      if (a.body_part == SynthBodyPartName(p)) o.image.body_part = p;
    }
    if (!o.image.body_part) {
      std::cerr << "beamtrim synth: --body-part: unknown '" << a.body_part << "'; one of "
                << Names(BodyPartNames()) << "\n";
      return false;
    }
  }
  o.image.output = a.output == "raw" ? SynthOutput::kRaw
                   : a.output == "processed" ? SynthOutput::kProcessed
                                             : SynthOutput::kMixed;
  return true;
}

int RunSynth(const SynthArgs& args) {
  SynthBatchOptions options;
  if (!ToOptions(args, options)) return kExitUsage;
  std::cerr << "beamtrim synth: writing " << options.count << " synthetic images to "
            << options.out_dir.string() << " (seed " << options.seed << ", "
            << options.image.pixel_mm << " mm pixels" << (options.clinic ? ", clinic" : "")
            << ")\n";
  int last = -1;
  auto progress = [&last](int done, int total) {
    int step = std::max(1, total / 20);
    if (done == total || done / step != last / step) {
      std::cerr << "  " << done << " / " << total << "\n";
      last = done;
    }
  };
  SynthBatchResult r = WriteSynthBatch(options, progress);
  for (const Error& e : r.errors) std::cerr << "beamtrim synth: " << e.ToString() << "\n";
  std::cerr << "beamtrim synth: " << r.written << " images written, " << r.errors.size()
            << " failed. All data are synthetic (invented patients, staff and clinic).\n";
  return r.errors.empty() ? kExitOk : kExitFailure;
}

}  // namespace

void AddSynthCommand(CLI::App& app) {
  auto args = std::make_shared<SynthArgs>();
  CLI::App* cmd = app.add_subcommand(
      "synth",
      "Write synthetic radiographs (DICOM DX/CR) with exact ground truth, for testing and\n"
      "demonstration. Each image <name>.dcm gets <name>.truth.json (same schema as\n"
      "`measure` output); truth.jsonl and manifest.json list them all. The physics model\n"
      "(blade penumbra, heel effect, scatter, anatomy phantoms, noise) is in docs/synth.md.\n"
      "All patients, staff, rooms and the institution are invented.");
  cmd->add_option("--out", args->out, "Output folder (created if missing)")->required();
  cmd->add_option("--count", args->count, "Number of images")->check(CLI::Range(1, 1000000));
  cmd->add_option("--seed", args->seed, "Seed; the same seed gives the same images");
  cmd->add_option("--pixel-mm", args->pixel_mm,
                  "Detector pixel size in mm (0.5 small and fast; 0.1-0.2 full size)")
      ->check(CLI::Range(0.05, 5.0));
  cmd->add_flag("--full-size", args->full_size, "Full-size images: 0.15 mm pixels");
  cmd->add_option("--situation", args->situation,
                  "Only this kind of picture: " + Names(SituationNames()));
  cmd->add_option("--syntax", args->syntax,
                  "Transfer syntax, or 'mixed' for a spread over all: " + Names(SyntaxNames()));
  cmd->add_option("--output", args->output, "Pixel data: raw, processed or mixed")
      ->check(CLI::IsMember({"raw", "processed", "mixed"}));
  cmd->add_option("--body-part", args->body_part,
                  "Only this body part: " + Names(BodyPartNames()));
  cmd->add_flag("--clinic", args->clinic,
                "A fictional clinic's three months of exams: four rooms, nine radiographers\n"
                "with different collimation habits (for the demo)");
  cmd->add_flag("--png", args->png, "Also write an 8-bit PNG preview per image");
  cmd->add_flag("--noiseless", args->noiseless, "No quantum, electronic or gain noise");
  cmd->add_option("--threads", args->threads, "Worker threads (0 = all cores)")
      ->check(CLI::Range(0, 256));
  cmd->callback([args] { ExitCode() = RunSynth(*args); });
}

}  // namespace beamtrim::cli
