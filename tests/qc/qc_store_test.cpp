// QC records in the store and the one-page report.
#include <doctest/doctest.h>

#include <unistd.h>

#include <filesystem>

#include <nlohmann/json.hpp>

#include "beamtrim/qc.h"
#include "beamtrim/synth_qc.h"

using namespace beamtrim;

namespace {

std::filesystem::path TempDir(const std::string& name) {
  auto dir = std::filesystem::temp_directory_path() / ("beamtrim_qc_" + name + "_" + std::to_string(::getpid()));
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  return dir;
}

struct Analysed {
  QcExposure exposure;
  QcResult result;
};

Analysed Analyse(const std::string& room, const std::string& date, std::array<double, 4> offsets) {
  QcExposureSpec spec;
  spec.width = 700;
  spec.height = 800;
  spec.pixel_mm = 0.35;
  spec.xray_mm = {90.0, 90.0, 100.0, 100.0};
  spec.offset_mm = offsets;
  Analysed a{MakeQcExposure(spec), {}};
  QcImageInfo info;
  info.spacing_mm = std::array<double, 2>{spec.pixel_mm, spec.pixel_mm};
  info.linear = true;
  info.sid_mm = 1000.0;
  info.station = room;
  info.date = date;
  auto r = AnalyseQcExposure(a.exposure.image, info, {});
  REQUIRE(r.ok());
  a.result = r.value();
  return a;
}

}  // namespace

TEST_CASE("QcRecordIsStoredAndReadBackPerRoom") {
  auto dir = TempDir("store");
  auto store = dir / "audit.sqlite";
  Analysed a = Analyse("XR-ROOM-2", "20260105", {3.0, -2.0, 1.0, 4.0});
  Analysed b = Analyse("XR-ROOM-5", "20260106", {12.0, 11.0, 0.0, 0.0});
  Analysed c = Analyse("XR-ROOM-2", "20260301", {1.0, 1.0, 1.0, 1.0});
  auto id_a = SaveQcRecord(store, a.result);
  REQUIRE(id_a.ok());
  REQUIRE(SaveQcRecord(store, b.result).ok());
  REQUIRE(SaveQcRecord(store, c.result).ok());

  auto room2 = LoadQcHistory(store, "XR-ROOM-2");
  REQUIRE(room2.ok());
  REQUIRE(room2->size() == 2);
  CHECK((*room2)[0].date == "20260105");  // oldest first
  CHECK((*room2)[1].date == "20260301");
  CHECK((*room2)[0].overall == a.result.overall);
  REQUIRE((*room2)[0].width_sum_mm);
  CHECK(*(*room2)[0].width_sum_mm == doctest::Approx(*a.result.width_axis.value_mm));
  auto json = nlohmann::json::parse((*room2)[0].result_json);
  CHECK(json["schema"] == "beamtrim.qc-field");
  CHECK(json["station"] == "XR-ROOM-2");
  CHECK(json["edges"].size() == 4);

  auto all = LoadQcHistory(store);
  REQUIRE(all.ok());
  CHECK(all->size() == 3);
  CHECK((*all)[1].station == "XR-ROOM-5");
  CHECK((*all)[1].overall == "fail");  // 12 + 11 mm > 20 mm at SID 1000 mm
  std::filesystem::remove_all(dir);
}

TEST_CASE("LoadingHistoryFromAMissingStoreIsAnError") {
  auto dir = TempDir("missing");
  auto r = LoadQcHistory(dir / "nothing.sqlite");
  CHECK_FALSE(r.ok());
  std::filesystem::remove_all(dir);
}

TEST_CASE("QcReportIsSelfContainedAndCarriesTheCaution") {
  Analysed a = Analyse("XR-ROOM-2", "20260105", {3.0, -2.0, 1.0, 4.0});
  std::vector<QcHistoryRow> history(1);
  history[0].station = "XR-ROOM-2";
  history[0].date = "20251201";
  history[0].overall = "pass";
  auto html = RenderQcReportHtml(a.result, a.exposure.image, history);
  REQUIRE(html.ok());
  const std::string& s = html.value();
  CHECK(s.find("data:image/png;base64,") != std::string::npos);
  CHECK(s.find("src=\"http") == std::string::npos);  // nothing fetched from elsewhere
  CHECK(s.find("medical physicist") != std::string::npos);
  CHECK(s.find("Local regulations") != std::string::npos);
  CHECK(s.find("20251201") != std::string::npos);
  CHECK(s.find("left + right misalignment") != std::string::npos);
}

TEST_CASE("QcReportRefusesAnImageOfAnotherSize") {
  Analysed a = Analyse("XR-ROOM-2", "20260105", {0.0, 0.0, 0.0, 0.0});
  Image other(10, 10, 1.0f);
  auto html = RenderQcReportHtml(a.result, other, {});
  CHECK_FALSE(html.ok());
}
