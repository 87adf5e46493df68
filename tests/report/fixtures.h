// Synthetic ground truth for the report tests: a simple radiograph-like image (blocked border,
// open field, a brighter-than-open "anatomy" ellipse) and records constructed by hand.
// All names, rooms and paths are invented.
#pragma once

#include <cmath>
#include <string>

#include "beamtrim/geometry.h"
#include "beamtrim/image.h"
#include "beamtrim/record.h"

namespace beamtrim::testing {

// Field [fx0, fx1) x [fy0, fy1); anatomy ellipse centred in it. Linear values: blocked 40,
// open field 4000, anatomy 400 (attenuated). Larger = more radiation.
struct PhantomGeometry {
  int width = 400, height = 300;
  double fx0 = 60, fy0 = 40, fx1 = 340, fy1 = 260;
  double ax0 = 150, ay0 = 90, ax1 = 250, ay1 = 210;  // anatomy bounding box
};

inline Image MakePhantom(const PhantomGeometry& g = {}) {
  Image image(g.width, g.height, 40.0f);
  const double cx = (g.ax0 + g.ax1) / 2, cy = (g.ay0 + g.ay1) / 2;
  const double rx = (g.ax1 - g.ax0) / 2, ry = (g.ay1 - g.ay0) / 2;
  for (int y = 0; y < g.height; ++y) {
    for (int x = 0; x < g.width; ++x) {
      const double px = x + 0.5, py = y + 0.5;
      if (px < g.fx0 || px >= g.fx1 || py < g.fy0 || py >= g.fy1) continue;
      const double e = std::pow((px - cx) / rx, 2) + std::pow((py - cy) / ry, 2);
      image.at(x, y) = e <= 1.0 ? 400.0f : 4000.0f;
    }
  }
  return image;
}

// A record describing MakePhantom(g): left, right and top borders visible, bottom side at the
// image edge without a border, anatomy clipped at nothing unless asked.
inline ImageRecord MakePhantomRecord(const PhantomGeometry& g = {}) {
  ImageRecord r;
  r.file = "/archive/DOE^JANE/19700101/IMG0001.dcm";  // patient-like path: must never be shown
  r.sop_instance_uid = "1.2.826.0.1.3680043.10.999.1";
  r.rows = g.height;
  r.columns = g.width;
  r.pixel_spacing_mm = std::array<double, 2>{0.5, 0.5};
  r.context.operator_name = "RT-07";
  r.context.station = "ROOM 2";
  r.context.body_part = "HAND";
  r.context.view = "PA";
  r.context.month = "2026-11";
  r.context.study_date = "20261115";
  r.context.linear = true;
  FieldMeasurement f;
  f.polygon_px = RectPolygon(g.fx0, g.fy0, g.fx1, g.fy1);
  f.area_px = Area(f.polygon_px);
  for (Side s : kAllSides) {
    f.side(s).side = s;
    f.side(s).visible = s != Side::kBottom;
  }
  r.field = f;
  AnatomyMeasurement a;
  a.found = true;
  a.box_px = std::array<Point2d, 4>{Point2d{g.ax0, g.ay0}, Point2d{g.ax1, g.ay0},
                                    Point2d{g.ax1, g.ay1}, Point2d{g.ax0, g.ay1}};
  r.anatomy = a;
  ExcessMeasurement e;
  const double field_area = (g.fx1 - g.fx0) * (g.fy1 - g.fy0);
  const double box_area = (g.ax1 - g.ax0) * (g.ay1 - g.ay0);
  e.fraction_at_0mm = (field_area - box_area) / field_area;
  e.fraction_at_margin = e.fraction_at_0mm;
  e.area_mm2 = (field_area - box_area) * 0.25;
  r.excess = e;
  DoseMeasurement d;
  d.kap_dgy_cm2 = 0.2;
  d.avoidable_kap_dgy_cm2 = 0.2 * *e.fraction_at_0mm;
  r.dose = d;
  Verdict v;
  v.outcome = "needs review";
  v.rule = "hand";
  v.reasons = {"bottom border not visible"};
  r.verdict = v;
  return r;
}

}  // namespace beamtrim::testing

#include <functional>

#include "beamtrim/overlay.h"
#include "beamtrim/report.h"

namespace beamtrim::testing {

// A department of three radiographers over four months, with thumbnails rendered from the
// phantom for all worst cases but the last, which gets the "file gone" note.
inline ReportModel MakeSampleModel(
    std::function<std::string(const std::string&)> staff_label = {}) {
  ReportOptions o;
  o.period = "2026-11";
  o.staff_label = std::move(staff_label);
  o.pseudonymised = static_cast<bool>(o.staff_label);
  ReportBuilder b(o);
  const char* people[] = {"RT-07", "RT-12", "RT-21"};
  const char* rooms[] = {"ROOM 1", "ROOM 2"};
  const char* months[] = {"2026-08", "2026-09", "2026-10", "2026-11"};
  int index = 0;
  for (const char* month : months) {
    for (int i = 0; i < 60; ++i) {
      ImageRecord r = MakePhantomRecord();
      ++index;
      r.sop_instance_uid = "1.2.826.0.1.3680043.10.999." + std::to_string(index);
      r.file = "/archive/DOE^JANE" + std::to_string(index) + "/IMG.dcm";
      r.context.operator_name = people[i % 3];
      r.context.station = rooms[i % 2];
      r.context.body_part = i % 4 == 0 ? "CHEST" : "HAND";
      r.context.month = month;
      const double excess = 0.05 + 0.9 * ((index * 37) % 100) / 100.0;
      r.excess->fraction_at_0mm = excess;
      r.dose->avoidable_kap_dgy_cm2 = 0.2 * excess;
      r.verdict->outcome = excess > 0.5 ? "needs review" : "acceptable";
      if (i % 7 == 0) r.field->side(Side::kLeft).visible = false;
      if (i % 11 == 0) r.anatomy->clipped_sides = {Side::kTop};
      b.Add(r);
    }
  }
  ReportModel m = b.Finish();
  const Image image = MakePhantom();
  OverlayOptions thumb;
  thumb.width_px = 360;
  thumb.legend = false;
  thumb.compact_labels = true;
  auto attach = [&](std::vector<CaseSummary>& cases) {
    for (size_t i = 0; i < cases.size(); ++i) {
      if (i + 1 == cases.size() && cases.size() > 1) {
        cases[i].thumbnail_note = "the source file is no longer where it was measured";
        continue;
      }
      auto rgb = RenderOverlay(image, true, cases[i].record, thumb);
      if (rgb.ok()) cases[i].thumbnail_png = EncodePng(*rgb).value();
    }
  };
  attach(m.worst);
  for (RadiographerSheet& s : m.sheets) attach(s.cases);
  return m;
}

}  // namespace beamtrim::testing
