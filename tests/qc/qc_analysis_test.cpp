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

TEST_CASE("MarkersAreFoundAtTheirKnownPositions") {
  // Synthetic ground truth: the generator records where each marker is centred.
  for (QcMarkerKind kind : {QcMarkerKind::kCoin, QcMarkerKind::kClip, QcMarkerKind::kWire}) {
    QcExposureSpec spec = SmallSpec();
    spec.kind = kind;
    spec.offset_mm = {2.0, -5.0, 0.0, 8.0};
    QcExposure e = MakeQcExposure(spec);
    std::vector<QcMarker> markers = FindQcMarkers(e.image, true, {spec.pixel_mm, spec.pixel_mm});
    INFO(QcMarkerKindName(kind));
    REQUIRE(markers.size() == e.truth.marker_centres_px.size());
    // Markers are laid on the left, right, top and bottom edges in that order; the position
    // across the edge is what places the light edge (a clip's U is not symmetric along it).
    for (size_t k = 0; k < e.truth.marker_centres_px.size(); ++k) {
      const Point2d& truth = e.truth.marker_centres_px[k];
      bool vertical = k < 2;
      double best = 1e9;
      for (const QcMarker& m : markers) {
        double along = vertical ? std::fabs(m.centre_px.y - truth.y) : std::fabs(m.centre_px.x - truth.x);
        if (along * spec.pixel_mm > 10.0) continue;
        best = std::min(best, vertical ? std::fabs(m.centre_px.x - truth.x) : std::fabs(m.centre_px.y - truth.y));
      }
      CHECK(best * spec.pixel_mm < 0.1);
    }
    if (kind == QcMarkerKind::kWire) {
      for (const QcMarker& m : markers) CHECK(m.elongated);
    }
  }
}

TEST_CASE("MarkerPartlyOutsideTheFieldIsStillFound") {
  // Light edge 6 mm beyond the x-ray edge on the left: the 20 mm coin centred on the light edge
  // lies 4 mm inside and 16 mm outside the x-ray field.
  QcExposureSpec spec = SmallSpec();
  spec.offset_mm = {-6.0, 0.0, 0.0, 0.0};
  QcExposure e = MakeQcExposure(spec);
  auto r = AnalyseQcExposure(e.image, InfoFor(e), {});
  REQUIRE(r.ok());
  bool found = false;
  for (const QcMarker& m : r->markers) {
    if (!m.sides.empty() && m.sides[0] == Side::kLeft) {
      found = true;
      CHECK(m.straddles_edge);
    }
  }
  CHECK(found);
  REQUIRE(r->edge(Side::kLeft).misalignment_mm);
  double truth = QcTruthEdgeMm(spec, Side::kLeft, EdgeDefinition::kQuarterMaximum) - e.truth.light_mm[0];
  CHECK(std::fabs(*r->edge(Side::kLeft).misalignment_mm - truth) < 0.3);
}

TEST_CASE("MissingMarkerGivesAClearMessageAndNoInventedEdge") {
  QcExposureSpec spec = SmallSpec();
  spec.marker_present = {true, true, false, true};  // nothing laid at the top edge
  QcExposure e = MakeQcExposure(spec);
  auto r = AnalyseQcExposure(e.image, InfoFor(e), {});
  REQUIRE(r.ok());
  const QcEdge& top = r->edge(Side::kTop);
  CHECK(top.xray_mm.has_value());  // the x-ray edge is still measured
  CHECK_FALSE(top.light_mm.has_value());
  CHECK_FALSE(top.misalignment_mm.has_value());
  CHECK(top.note == "no marker found at the top edge of the x-ray field: light edge not assessed");
  CHECK_FALSE(r->length_axis.pass.has_value());
  CHECK(r->length_axis.note.find("not assessed") != std::string::npos);
  CHECK(r->width_axis.pass.has_value());
  CHECK(r->overall == "incomplete");
}

TEST_CASE("ProcessedImageUsesTheHalfDefinitionAndSaysSo") {
  QcExposureSpec spec = SmallSpec();
  spec.linear_raw = false;
  spec.offset_mm = {3.0, 3.0, -4.0, 2.0};
  QcExposure e = MakeQcExposure(spec);
  auto r = AnalyseQcExposure(e.image, InfoFor(e), {});
  REQUIRE(r.ok());
  CHECK(r->edge_definition == EdgeDefinition::kHalfTransition);
  bool said = false;
  for (const std::string& n : r->notes) said = said || n.find("processed (non-linear) image") != std::string::npos;
  CHECK(said);
  for (Side s : kAllSides) {
    double truth = QcTruthEdgeMm(spec, s, EdgeDefinition::kHalfTransition) - e.truth.light_mm[static_cast<int>(s)];
    REQUIRE(r->edge(s).misalignment_mm);
    CHECK(std::fabs(*r->edge(s).misalignment_mm - truth) < 0.3);
  }
}

TEST_CASE("CornerMarkersDefineTheLightEdges") {
  QcExposureSpec spec = SmallSpec();
  spec.layout = QcMarkerLayout::kCorners;
  spec.offset_mm = {5.0, -2.0, 3.0, 7.0};
  QcExposure e = MakeQcExposure(spec);
  auto r = AnalyseQcExposure(e.image, InfoFor(e), {});
  REQUIRE(r.ok());
  for (Side s : kAllSides) {
    const QcEdge& edge = r->edge(s);
    REQUIRE_MESSAGE(edge.misalignment_mm, edge.note);
    CHECK(edge.light_source == "corner markers");
    double truth = QcTruthEdgeMm(spec, s, EdgeDefinition::kQuarterMaximum) - e.truth.light_mm[static_cast<int>(s)];
    INFO(SideName(s), " measured ", *edge.misalignment_mm, " truth ", truth);
    std::string found;
    for (const QcMarker& m : r->markers) {
      found += std::to_string(m.centre_px.x) + "," + std::to_string(m.centre_px.y) + " " +
               QcMarkerPlacementName(m.placement) + "; ";
    }
    for (const Point2d& p : e.truth.marker_centres_px) found += "truth " + std::to_string(p.x) + "," + std::to_string(p.y) + "; ";
    INFO(found);
    CHECK(std::fabs(*edge.misalignment_mm - truth) < 0.3);
  }
}

TEST_CASE("FailingAxisIsReportedAsFail") {
  // SID 1000 mm: left 12 mm + right 11 mm = 23 mm > 20 mm (synthetic ground truth).
  QcExposureSpec spec = SmallSpec();
  spec.offset_mm = {12.0, 11.0, 1.0, -1.0};
  QcExposure e = MakeQcExposure(spec);
  auto r = AnalyseQcExposure(e.image, InfoFor(e), {});
  REQUIRE(r.ok());
  REQUIRE(r->width_axis.pass);
  CHECK_FALSE(*r->width_axis.pass);
  REQUIRE(r->length_axis.pass);
  CHECK(*r->length_axis.pass);
  CHECK(r->overall == "fail");
}

TEST_CASE("WithoutSidResultsAreInMillimetresOnly") {
  QcExposureSpec spec = SmallSpec();
  QcExposure e = MakeQcExposure(spec);
  auto r = AnalyseQcExposure(e.image, InfoFor(e, /*with_sid=*/false), {});
  REQUIRE(r.ok());
  CHECK_FALSE(r->sid_mm.has_value());
  CHECK(r->width_axis.value_mm.has_value());
  CHECK_FALSE(r->width_axis.pass.has_value());
  CHECK_FALSE(r->edge(Side::kLeft).misalignment_pct_sid.has_value());
  CHECK(r->overall == "incomplete");
  bool said = false;
  for (const std::string& n : r->notes) said = said || n.find("SID unknown") != std::string::npos;
  CHECK(said);
  // --sid-mm fills the gap.
  QcInputs inputs;
  inputs.sid_mm = 1000.0;
  auto with = AnalyseQcExposure(e.image, InfoFor(e, false), inputs);
  REQUIRE(with.ok());
  CHECK(with->sid_source == "command line");
  CHECK(with->width_axis.pass.has_value());
}

TEST_CASE("RulerValuesReplaceMarkers") {
  QcExposureSpec spec = SmallSpec();
  spec.marker_present = {false, false, false, false};
  QcExposure e = MakeQcExposure(spec);
  QcInputs inputs;
  inputs.light_field_mm = std::array<double, 4>{95.0, 110.0, 100.0, 120.0};
  inputs.indicated_size_mm = std::array<double, 2>{205.0, 240.0};
  auto r = AnalyseQcExposure(e.image, InfoFor(e), inputs);
  REQUIRE(r.ok());
  for (Side s : kAllSides) {
    int i = static_cast<int>(s);
    double truth = QcTruthEdgeMm(spec, s, EdgeDefinition::kQuarterMaximum) - (*inputs.light_field_mm)[i];
    REQUIRE(r->edge(s).misalignment_mm);
    CHECK(r->edge(s).light_source == "command line");
    CHECK(std::fabs(*r->edge(s).misalignment_mm - truth) < 0.3);
  }
  // Width 205 mm x-ray (100 + 105) vs 205 indicated; height 225 vs 240 (synthetic truth,
  // shifted by the quarter-maximum offset of the penumbra on each side).
  REQUIRE(r->size_width.value_mm);
  double width = QcTruthEdgeMm(spec, Side::kLeft, EdgeDefinition::kQuarterMaximum) +
                 QcTruthEdgeMm(spec, Side::kRight, EdgeDefinition::kQuarterMaximum);
  CHECK(std::fabs(*r->size_width.value_mm - std::fabs(width - 205.0)) < 0.4);
}

TEST_CASE("HeaderCollimatorEdgesAreComparedWithDetectedEdges") {
  QcExposureSpec spec = SmallSpec();
  QcExposure e = MakeQcExposure(spec);
  QcImageInfo info = InfoFor(e);
  // Declared edges 10 px (3 mm) inside the true geometric edges on every side.
  info.collimator_edges = DeclaredEdges{QcEdgeToPixel(spec, Side::kLeft, spec.xray_mm[0]) + 10,
                                        QcEdgeToPixel(spec, Side::kRight, spec.xray_mm[1]) - 10,
                                        QcEdgeToPixel(spec, Side::kTop, spec.xray_mm[2]) + 10,
                                        QcEdgeToPixel(spec, Side::kBottom, spec.xray_mm[3]) - 10};
  auto r = AnalyseQcExposure(e.image, info, {});
  REQUIRE(r.ok());
  for (Side s : kAllSides) {
    REQUIRE(r->edge(s).declared_deviation_mm);
    double truth = QcTruthEdgeMm(spec, s, EdgeDefinition::kQuarterMaximum) - (spec.xray_mm[static_cast<int>(s)] - 3.0);
    CHECK(std::fabs(*r->edge(s).declared_deviation_mm - truth) < 0.3);
  }
}

TEST_CASE("MissingPixelSpacingIsAClearError") {
  QcExposure e = MakeQcExposure(SmallSpec());
  QcImageInfo info = InfoFor(e);
  info.spacing_mm.reset();
  auto r = AnalyseQcExposure(e.image, info, {});
  REQUIRE_FALSE(r.ok());
  CHECK(r.error().reason.find("no pixel spacing") != std::string::npos);
}

TEST_CASE("FlatImageWithoutFieldIsAClearError") {
  Image flat(300, 300, 1000.0f);
  QcImageInfo info;
  info.spacing_mm = std::array<double, 2>{0.3, 0.3};
  info.linear = true;
  info.file = "flat.dcm";
  auto r = AnalyseQcExposure(flat, info, {});
  REQUIRE_FALSE(r.ok());
  CHECK(r.error().file == "flat.dcm");
  CHECK(r.error().reason.find("no exposed field") != std::string::npos);
}
