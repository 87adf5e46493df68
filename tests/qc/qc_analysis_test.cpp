// QC analysis on synthetic QC exposures (synthetic ground truth: markers and edges are placed
// by the generator, src/synth/qc_exposure.cpp, so their positions are known exactly).
#include <doctest/doctest.h>

#include <cmath>

#include "beamtrim/qc.h"
#include "beamtrim/synth_qc.h"

using namespace beamtrim;

namespace {

QcImageInfo InfoFor(const QcExposure& e, bool with_sid = true) {
  QcImageInfo info;
  info.spacing_mm = std::array<double, 2>{e.pixel_mm, e.pixel_mm};
  info.linear = e.linear;
  if (with_sid) info.sid_mm = e.sid_mm;
  info.station = "XR-ROOM-2";
  info.date = "20260105";
  info.file = "synthetic";
  return info;
}

QcExposureSpec SmallSpec() {
  QcExposureSpec spec;
  spec.width = 900;
  spec.height = 1000;
  spec.pixel_mm = 0.3;
  spec.xray_mm = {100.0, 105.0, 110.0, 115.0};
  return spec;
}

}  // namespace

TEST_CASE("MisalignmentPerEdgeMatchesSyntheticTruth") {
  QcExposureSpec spec = SmallSpec();
  spec.offset_mm = {4.0, -3.0, 6.5, -2.0};
  QcExposure e = MakeQcExposure(spec);
  auto r = AnalyseQcExposure(e.image, InfoFor(e), {});
  REQUIRE(r.ok());
  CHECK(r->edge_definition == EdgeDefinition::kQuarterMaximum);
  for (Side s : kAllSides) {
    int i = static_cast<int>(s);
    const QcEdge& edge = r->edge(s);
    REQUIRE_MESSAGE(edge.misalignment_mm.has_value(), SideName(s), ": ", edge.note);
    double truth_xray = QcTruthEdgeMm(spec, s, EdgeDefinition::kQuarterMaximum);
    double truth = truth_xray - e.truth.light_mm[i];
    INFO(SideName(s), " measured ", *edge.misalignment_mm, " truth ", truth);
    CHECK(std::fabs(*edge.misalignment_mm - truth) < 0.3);
    CHECK(std::fabs(*edge.xray_mm - truth_xray) < 0.3);
  }
}
