// WriteReports end to end over a real store: 20 000 constructed records (synthetic ground
// truth), one of them backed by a DICOM file written here so its thumbnail is re-rendered from
// the path recorded in the store; every other source file is absent.
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include <doctest/doctest.h>

#include "beamtrim/dicom_writer.h"
#include "beamtrim/report.h"
#include "beamtrim/store.h"
#include "report/fixtures.h"

namespace beamtrim {
namespace {

namespace fs = std::filesystem;

std::string ReadAll(const fs::path& file) {
  std::ifstream in(file, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

size_t CountOf(const std::string& text, const std::string& needle) {
  size_t n = 0;
  for (size_t pos = text.find(needle); pos != std::string::npos; pos = text.find(needle, pos + 1)) ++n;
  return n;
}

// The phantom as a 12-bit raw DX file (FOR PROCESSING, MONOCHROME2).
void WritePhantomDicom(const fs::path& file, const std::string& sop_uid) {
  testing::PhantomGeometry g;
  Image image = testing::MakePhantom(g);
  RadiographHeader h;
  h.sop_instance_uid = sop_uid;
  h.sop_class_uid = "1.2.840.10008.5.1.4.1.1.1.1";  // Digital X-Ray Image Storage - For Presentation
  h.modality = "DX";
  h.presentation_intent_type = "FOR PROCESSING";
  h.photometric_interpretation = "MONOCHROME2";
  h.rows = g.height;
  h.columns = g.width;
  h.bits_allocated = 16;
  h.bits_stored = 12;
  h.high_bit = 11;
  h.imager_pixel_spacing = std::array<double, 2>{0.5, 0.5};
  h.study_date = "20261115";
  StoredPixels px;
  px.width = g.width;
  px.height = g.height;
  for (int y = 0; y < g.height; ++y)
    for (int x = 0; x < g.width; ++x) px.values.push_back(static_cast<int32_t>(image.at(x, y)));
  REQUIRE(WriteRadiograph(h, px, file).ok());
}

struct Fixture {
  fs::path dir;
  fs::path store;
  fs::path real_dicom;
};

// 20 000 images: 25 radiographers, 6 rooms, 8 exams over 12 months; 1 500 in 2026-11.
Fixture MakeStore(const std::string& name) {
  Fixture f;
  f.dir = fs::current_path() / name;
  fs::remove_all(f.dir);
  fs::create_directories(f.dir);
  f.store = f.dir / "audit.sqlite";
  f.real_dicom = f.dir / "PATIENT^REAL" / "image.dcm";
  fs::create_directories(f.real_dicom.parent_path());
  StoreOptions options;
  options.key_file = f.dir / "audit.key";
  auto store = Store::Open(f.store, options);
  REQUIRE(store.ok());
  const char* exams[] = {"CHEST", "HAND", "KNEE", "PELVIS", "SKULL", "FOOT", "ABDOMEN", "FOREARM"};
  std::vector<std::pair<MeasuredImage, FileIdentity>> batch;
  for (int i = 0; i < 20000; ++i) {
    MeasuredImage m;
    ImageRecord& r = m.record;
    r = testing::MakePhantomRecord();
    r.sop_instance_uid = "1.2.826.0.1.3680043.10.999." + std::to_string(i);
    r.file = (f.dir / ("MISSING^PATIENT" + std::to_string(i)) / "img.dcm").string();
    const bool in_period = i < 1500;
    const int month = in_period ? 11 : 1 + i % 10;
    char month_text[16];
    std::snprintf(month_text, sizeof month_text, "2026-%02d", month);
    r.context.month = month_text;
    r.context.study_date = r.context.month.substr(0, 4) + r.context.month.substr(5, 2) + "15";
    r.context.operator_name = "RT-" + std::to_string(10 + i % 25);
    r.context.station = "ROOM " + std::to_string(1 + i % 6);
    r.context.body_part = exams[i % 8];
    const double excess = 0.02 + 0.9 * ((i * 7919) % 1000) / 1000.0;
    r.excess->fraction_at_0mm = excess;
    r.dose->avoidable_kap_dgy_cm2 = 0.2 * excess;
    r.verdict->outcome = excess > 0.4 ? "needs review" : "acceptable";
    if (i == 0) {  // the one image whose file exists, given the largest excess
      r.file = f.real_dicom.string();
      r.excess->fraction_at_0mm = 0.99;
      WritePhantomDicom(f.real_dicom, r.sop_instance_uid);
    }
    m.accession_number = "ACC" + std::to_string(i);
    FileIdentity id{r.file, 1000 + i, 1'700'000'000'000'000'000LL + i};
    batch.emplace_back(std::move(m), id);
    if (batch.size() == 2000) {
      std::vector<PutOutcome> outcomes;
      REQUIRE((*store)->PutBatch(batch, &outcomes).ok());
      batch.clear();
    }
  }
  return f;
}

}  // namespace

TEST_CASE("ReportOnTwentyThousandStoredImagesStaysSmallAndHidesPaths") {
  Fixture f = MakeStore("store-report");
  ReportRequest request;
  request.store = f.store;
  request.period = "2026-11";
  request.out = f.dir / "report.html";
  request.feedback_dir = f.dir / "feedback";
  request.chromium = f.dir / "no-chromium";  // PDFs are tested in browser_test.cpp
  Result<ReportOutcome> outcome = WriteReports(request);
  REQUIRE_MESSAGE(outcome.ok(), outcome.error().ToString());
  CHECK(outcome->images_in_period == 1500);
  REQUIRE(fs::exists(request.out));
  // "A few MB": thumbnails only for the cases shown.
  CHECK(fs::file_size(request.out) < 3'000'000);
  const std::string html = ReadAll(request.out);
  CHECK(html.find("1\u2009500") != std::string::npos);  // images measured in the period
  // The first case was re-rendered from its DICOM file; the others' files are gone.
  CHECK(CountOf(html, "src=\"data:image/png;base64,") == 1);
  CHECK(CountOf(html, "Picture not available") == 5);
  CHECK(html.find("PATIENT") == std::string::npos);
  CHECK(html.find(f.dir.string()) == std::string::npos);
  CHECK(html.find("1.2.826.0.1.3680043") == std::string::npos);
  CHECK(html.find("ACC1") == std::string::npos);
  // One sheet per radiographer; the PDF step says why it was skipped.
  int sheets = 0;
  for (const auto& e : fs::directory_iterator(request.feedback_dir)) sheets += e.path().extension() == ".html";
  CHECK(sheets == 25);
  bool pdf_note = false;
  for (const std::string& n : outcome->notes) pdf_note |= n.find("PDF sheets skipped") != std::string::npos;
  CHECK(pdf_note);

  // Pseudonymised: no recorded operator name anywhere, stable codes from the key file.
  request.pseudonymise = true;
  request.key_file = f.dir / "staff.key";
  request.out = f.dir / "report-pseudo.html";
  request.feedback_dir = f.dir / "feedback-pseudo";
  outcome = WriteReports(request);
  REQUIRE_MESSAGE(outcome.ok(), outcome.error().ToString());
  const std::string pseudo = ReadAll(request.out);
  CHECK(pseudo.find("RT-1") == std::string::npos);
  CHECK(pseudo.find("STAFF-") != std::string::npos);
  for (const auto& e : fs::directory_iterator(request.feedback_dir)) {
    CHECK(e.path().filename().string().find("STAFF-") != std::string::npos);
    CHECK(ReadAll(e.path()).find("RT-1") == std::string::npos);
  }
}

TEST_CASE("ReportErrorsNameTheProblem") {
  ReportRequest request;
  request.store = fs::current_path() / "no-such-store.sqlite";
  request.period = "2026-11";
  request.out = fs::current_path() / "never.html";
  Result<ReportOutcome> missing = WriteReports(request);
  REQUIRE_FALSE(missing.ok());
  CHECK(missing.error().ToString().find("no-such-store.sqlite") != std::string::npos);

  request.period = "November";
  Result<ReportOutcome> bad_period = WriteReports(request);
  REQUIRE_FALSE(bad_period.ok());
  CHECK(bad_period.error().attribute == "--period");

  request.period = "2026-11";
  request.pseudonymise = true;
  Result<ReportOutcome> no_key = WriteReports(request);
  REQUIRE_FALSE(no_key.ok());
  CHECK(no_key.error().attribute == "--key-file");
}

}  // namespace beamtrim
