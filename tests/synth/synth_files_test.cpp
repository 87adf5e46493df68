// Synthetic radiographs written as DICOM and read back by beamtrim's own reader: every
// transfer syntax, header attributes, and (for lossless syntaxes) exact pixel values.
// Data: synthetic ground truth made by the generator.
#include <doctest/doctest.h>

#include <filesystem>
#include <fstream>

#include <nlohmann/json.hpp>

#include "beamtrim/dicom.h"
#include "beamtrim/dicom_writer.h"
#include "beamtrim/record.h"
#include "beamtrim/synth.h"

using namespace beamtrim;
namespace fs = std::filesystem;

namespace {

fs::path TempDir(const std::string& name) {
  fs::path dir = fs::temp_directory_path() / ("beamtrim-synth-test-" + name);
  fs::remove_all(dir);
  fs::create_directories(dir);
  return dir;
}

bool Lossless(TransferSyntax t) {
  return t != TransferSyntax::kJpegBaseline && t != TransferSyntax::kJpegExtended &&
         t != TransferSyntax::kJpegLsNearLossless && t != TransferSyntax::kJpeg2000;
}

}  // namespace

TEST_CASE("EveryTransferSyntaxIsWrittenAndReadBackWithItsHeader") {
  fs::path dir = TempDir("syntaxes");
  int i = 0;
  for (TransferSyntax syntax : AllTransferSyntaxes()) {
    INFO(TransferSyntaxName(syntax));
    SynthOptions o;
    o.pixel_mm = 2.0;
    o.syntax = syntax;
    SynthScenario sc = RandomScenario(8, i++, o);
    SynthImage img = Generate(sc);
    fs::path file = dir / (img.name + ".dcm");
    WriteOptions wo;
    wo.syntax = syntax;
    Status s = WriteRadiograph(img.header, img.stored, file, wo);
    REQUIRE_MESSAGE(s.ok(), s.error().ToString());
    Result<Radiograph> r = ReadRadiograph(file);
    REQUIRE_MESSAGE(r.ok(), r.error().ToString());
    const RadiographHeader& h = r->header;
    CHECK(h.rows == img.header.rows);
    CHECK(h.columns == img.header.columns);
    CHECK(h.bits_stored == img.header.bits_stored);
    CHECK(h.transfer_syntax_uid == std::string(TransferSyntaxUid(syntax)));
    CHECK(h.sop_instance_uid == img.header.sop_instance_uid);
    CHECK(h.modality == img.header.modality);
    CHECK(h.body_part_examined == img.header.body_part_examined);
    CHECK(h.operators_name == img.header.operators_name);
    CHECK(h.station_name == img.header.station_name);
    REQUIRE(h.distance_source_to_detector_mm.has_value());
    CHECK(*h.distance_source_to_detector_mm == doctest::Approx(sc.sid_mm));
    REQUIRE(h.imager_pixel_spacing.has_value());
    CHECK((*h.imager_pixel_spacing)[0] == doctest::Approx(2.0));
    REQUIRE(h.area_dose_product_dgy_cm2.has_value());
    CHECK(*h.area_dose_product_dgy_cm2 == doctest::Approx(*img.header.area_dose_product_dgy_cm2).epsilon(1e-4));
    if (Lossless(syntax) && !img.linear) {
      // Processed images, either photometric interpretation: the reader's "larger = more
      // radiation" values may differ from the generator's by a constant offset only
      // (PS3.3 C.8.11.3.1.2 Pixel Intensity Relationship Sign).
      REQUIRE(r->pixels.size() == img.pixels.size());
      double offset = r->pixels.data()[0] - img.pixels.data()[0];
      for (size_t k = 0; k < img.pixels.size(); k += 97) {
        CHECK(r->pixels.data()[k] - img.pixels.data()[k] == doctest::Approx(offset).epsilon(1e-6));
      }
    }
    if (Lossless(syntax) && img.linear) {
      // Raw linear MONOCHROME2: the reader's modality values equal the generator's.
      REQUIRE(r->pixels.size() == img.pixels.size());
      for (size_t k = 0; k < img.pixels.size(); k += 97) {
        CHECK(r->pixels.data()[k] == doctest::Approx(img.pixels.data()[k]));
      }
    }
  }
}

TEST_CASE("BatchWritesImagesTruthAndManifest") {
  fs::path dir = TempDir("batch");
  SynthBatchOptions o;
  o.out_dir = dir;
  o.count = 5;
  o.seed = 3;
  o.image.pixel_mm = 2.0;
  o.threads = 2;
  int calls = 0;
  SynthBatchResult r = WriteSynthBatch(o, [&calls](int, int) { ++calls; });
  for (const Error& e : r.errors) MESSAGE(e.ToString());
  CHECK(r.errors.empty());
  CHECK(r.written == 5);
  CHECK(calls >= 1);
  std::ifstream manifest(dir / "manifest.json");
  nlohmann::json m = nlohmann::json::parse(manifest);
  CHECK(m["images"].size() == 5);
  for (const auto& entry : m["images"]) {
    CHECK(fs::exists(dir / entry["file"].get<std::string>()));
    std::ifstream truth(dir / entry["truth"].get<std::string>());
    Result<ImageRecord> rec = RecordFromJson(nlohmann::json::parse(truth));
    REQUIRE(rec.ok());
    CHECK(rec->field.has_value());
  }
  std::ifstream lines(dir / "truth.jsonl");
  int n = 0;
  for (std::string line; std::getline(lines, line);) n += !line.empty();
  CHECK(n == 5);
}

TEST_CASE("UnwritableOutputFolderIsReportedNotFatal") {
  fs::path dir = TempDir("blocked");
  fs::path file = dir / "a-file";
  std::ofstream(file) << "x";
  SynthBatchOptions o;
  o.out_dir = file / "sub";
  o.count = 2;
  o.image.pixel_mm = 4.0;
  SynthBatchResult r = WriteSynthBatch(o);
  CHECK(r.written == 0);
  REQUIRE(r.errors.size() == 1);
  CHECK(r.errors[0].ToString().find("a-file") != std::string::npos);
}
