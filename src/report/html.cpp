// Page shell, style sheet, formats, tables and case figures of the HTML reports.
#include "report/html.h"

#include <cstdio>

#include "report/palette.h"
#include "report/tips.h"

namespace beamtrim::report_internal {
namespace {

namespace pal = report_palette;

std::string Hex(pal::Rgb c) {
  char buf[8];
  std::snprintf(buf, sizeof buf, "#%02x%02x%02x", c.r, c.g, c.b);
  return buf;
}

std::string StyleSheet() {
  std::string css = ":root{--paper:" + Hex(pal::kPaper) + ";--panel:" + Hex(pal::kPanel) +
                    ";--ink:" + Hex(pal::kInk) + ";--muted:" + Hex(pal::kMuted) +
                    ";--accent:" + Hex(pal::kAccent) + ";--rule:" + Hex(pal::kRule) +
                    ";--caution-ink:" + Hex(pal::kCautionInk) +
                    ";--caution-bg:" + Hex(pal::kCautionBg) + "}\n";
  css += R"CSS(*{box-sizing:border-box}
html{background:var(--paper);color:var(--ink);font:16px/1.5 "DejaVu Sans",system-ui,sans-serif}
body{max-width:68rem;margin:0 auto;padding:1.5rem 1.5rem 4rem}
header.masthead{border-top:6px solid var(--accent);padding-top:.9rem;margin-bottom:1rem}
.kicker{text-transform:uppercase;letter-spacing:.12em;font-size:.78rem;color:var(--accent);font-weight:600;margin:0}
h1{font-size:1.9rem;font-weight:600;margin:.15rem 0 .3rem;letter-spacing:-.01em}
h2{font-size:1.3rem;font-weight:600;margin:2.4rem 0 .7rem;padding-bottom:.3rem;border-bottom:1px solid var(--rule)}
h3{font-size:1.05rem;margin:1.4rem 0 .4rem}
p{max-width:46rem}
.meta{color:var(--muted);font-size:.9rem;margin:.2rem 0}
nav ol{display:flex;flex-wrap:wrap;gap:.2rem 1.4rem;padding:0;margin:.8rem 0;list-style:none;font-size:.9rem}
a{color:var(--accent)}
.figures{display:grid;grid-template-columns:repeat(auto-fit,minmax(10.5rem,1fr));gap:.75rem;margin:1rem 0;padding:0;list-style:none}
.figures li{background:var(--panel);border-left:4px solid var(--accent);padding:.7rem .9rem}
.figures .value{display:block;font-size:1.65rem;font-weight:600;font-variant-numeric:tabular-nums;line-height:1.2}
.figures .what{display:block;font-size:.86rem;color:var(--muted)}
.figures .dept{display:block;font-size:.82rem;color:var(--muted)}
table{border-collapse:collapse;width:100%;font-variant-numeric:tabular-nums;font-size:.9rem;margin:.4rem 0 1rem}
caption{text-align:left;font-weight:600;padding:.3rem 0;font-size:1rem}
th,td{padding:.32rem .55rem;border-bottom:1px solid #d9d6cf;text-align:right;vertical-align:top}
th[scope=row],.l{text-align:left}
th[scope=row]{white-space:nowrap}
table.compare{max-width:40rem}
thead th{border-bottom:2px solid var(--ink);font-weight:600;vertical-align:bottom}
tbody tr:nth-child(even){background:#f5f3ee}
aside.caution{background:var(--caution-bg);color:var(--caution-ink);border-left:4px solid #9a6a00;padding:.7rem 1.1rem;margin:1.2rem 0}
aside.caution h2,aside.caution h3{border:0;margin:.2rem 0 .4rem;font-size:1.05rem}
aside.caution ul{margin:.3rem 0;padding-left:1.2rem}
.chart{margin:.8rem 0 .2rem}
svg{max-width:100%;height:auto;display:block}
svg text{font-family:"DejaVu Sans",system-ui,sans-serif;fill:var(--ink)}
details{margin:.2rem 0 1.2rem;font-size:.9rem}
summary{cursor:pointer;color:var(--accent)}
.cases{display:grid;grid-template-columns:repeat(auto-fill,minmax(19rem,1fr));gap:1rem;margin:1rem 0}
figure.case{margin:0;background:#fff;border:1px solid #d9d6cf;padding:.5rem}
figure.case img{width:100%;height:auto;display:block;background:#202224}
.missing{aspect-ratio:4/3;display:flex;align-items:center;justify-content:center;background:var(--panel);color:var(--muted);text-align:center;padding:1rem;border:1px dashed var(--rule)}
figcaption{font-size:.86rem;margin-top:.45rem}
figcaption .id{font-weight:600;font-family:"DejaVu Sans Mono",monospace}
.legend ul{list-style:none;padding:0;margin:.5rem 0;display:flex;flex-wrap:wrap;gap:.35rem 1.4rem;font-size:.86rem}
.legend li{display:flex;align-items:center;gap:.45rem}
.legend svg{display:inline-block}
.tips li{margin:.35rem 0}
footer{margin-top:3rem;color:var(--muted);font-size:.85rem;border-top:1px solid var(--rule);padding-top:.6rem}
@page{size:A4;margin:14mm 12mm}
@media print{html{background:#fff;font-size:10.5pt}body{max-width:none;padding:0}
h2{break-after:avoid;margin-top:1.4rem}figure,table,.chart,aside,.figures{break-inside:avoid}
details,nav{display:none}.cases{grid-template-columns:repeat(3,1fr)}a{color:inherit;text-decoration:none}
tbody tr:nth-child(even){background:#f3f3f3}}
)CSS";
  return css;
}

// Line samples for the HTML legend, drawn like the overlay lines (halo + colour + pattern).
std::string LegendSample(pal::Rgb colour, std::string_view dash, bool ticks, bool hatch) {
  std::string s = R"(<svg width="44" height="16" viewBox="0 0 44 16" aria-hidden="true" focusable="false">)";
  if (hatch) {
    s += R"(<rect x="1" y="2" width="42" height="12" fill="#77766e"/>)";
    for (int x = -8; x < 44; x += 6) {
      s += "<line x1=\"" + std::to_string(x) + "\" y1=\"14\" x2=\"" + std::to_string(x + 12) +
           "\" y2=\"2\" stroke=\"" + Hex(colour) + "\" stroke-width=\"1.4\"/>";
    }
    return s + "</svg>";
  }
  const std::string d = dash.empty() ? "" : " stroke-dasharray=\"" + std::string(dash) + "\"";
  s += R"(<line x1="2" y1="8" x2="42" y2="8" stroke="#000" stroke-width="5")" + d + "/>";
  s += R"(<line x1="2" y1="8" x2="42" y2="8" stroke=")" + Hex(colour) + R"(" stroke-width="3")" + d + "/>";
  if (ticks) {
    for (int x = 6; x < 42; x += 9) {
      s += "<line x1=\"" + std::to_string(x) + "\" y1=\"8\" x2=\"" + std::to_string(x) +
           "\" y2=\"15\" stroke=\"" + Hex(colour) + "\" stroke-width=\"2.5\"/>";
    }
  }
  return s + "</svg>";
}

}  // namespace

std::string Escape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (char ch : text) {
    switch (ch) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += ch;
    }
  }
  return out;
}

std::string Pct(std::optional<double> percent, int decimals) {
  return percent ? FormatPercent(*percent, decimals) : "\u2013";
}

std::string FractionPct(std::optional<double> fraction, int decimals) {
  return fraction ? FormatPercent(100.0 * *fraction, decimals) : "\u2013";
}

std::string Count(int64_t n) {
  std::string digits = std::to_string(n < 0 ? -n : n), out;
  for (size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (digits.size() - i) % 3 == 0) out += "\u2009";
    out += digits[i];
  }
  return n < 0 ? "-" + out : out;
}

std::string Kap(double dgy_cm2) {
  char buf[48];
  std::snprintf(buf, sizeof buf, "%.2f Gy\u00b7cm\u00b2", dgy_cm2 / 10.0);
  return buf;
}

std::string PageStart(std::string_view title) {
  return "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
         "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
         "<meta name=\"robots\" content=\"noindex\">\n<title>" +
         Escape(title) + "</title>\n<style>\n" + StyleSheet() + "</style>\n</head>\n<body>\n";
}

std::string PageEnd() { return "</body>\n</html>\n"; }

std::string CautionsBox(bool long_form) {
  const std::string id = long_form ? "cautions-h" : "first-h";
  std::string s = "<aside class=\"caution\" aria-labelledby=\"" + id + "\">\n<h2 id=\"" + id +
                  "\">" + (long_form ? "Cautions" : "Read this first") + "</h2>\n";
  s += "<ul>\n"
       "<li>Dose figures are <strong>estimates for quality improvement</strong>, not patient dose "
       "records.</li>\n"
       "<li>Findings about a person are <strong>for coaching</strong>, to be reviewed with a "
       "qualified person, never for discipline.</li>\n"
       "<li>Local regulations, the department's own protocols and the medical physicist's "
       "judgement take precedence over anything shown here.</li>\n";
  if (long_form) {
    s += "<li>The measurement is automatic. A case shown here may be measured wrongly: look at "
         "the image before drawing a conclusion about it.</li>\n"
         "<li>This document contains staff data. Share it only within the department unless it "
         "was made with pseudonyms.</li>\n";
  }
  return s + "</ul>\n</aside>\n";
}

std::string GroupTable(const std::vector<GroupFigures>& groups, std::string_view caption,
                       std::string_view label_heading) {
  std::string s = "<table>\n<caption>" + Escape(caption) + "</caption>\n<thead><tr>"
                  "<th scope=\"col\" class=\"l\">" + Escape(label_heading) + "</th>"
                  "<th scope=\"col\">Images</th><th scope=\"col\">Assessable</th>"
                  "<th scope=\"col\">Median excess (of field)</th>"
                  "<th scope=\"col\">All borders visible</th><th scope=\"col\">Needs review</th>"
                  "<th scope=\"col\">Anatomy clipped</th>"
                  "<th scope=\"col\">Avoidable KAP (estimate)</th></tr></thead>\n<tbody>\n";
  for (const GroupFigures& g : groups) {
    const ReportFigures& f = g.figures;
    s += "<tr><th scope=\"row\">" + Escape(g.label) + "</th><td>" + Count(f.images) + "</td><td>" +
         Pct(f.PercentAssessable()) + "</td><td>" + FractionPct(f.median_excess) + "</td><td>" +
         Pct(f.PercentAllBordersVisible()) + "</td><td>" + Pct(f.PercentNeedsReview()) +
         "</td><td>" + Count(f.clipped) + "</td><td>" +
         (f.kap_images > 0 ? Kap(f.avoidable_kap_dgy_cm2) : "\u2013") + "</td></tr>\n";
  }
  return s + "</tbody>\n</table>\n";
}

std::string SidesSentence(const CaseSummary& c) {
  std::string s;
  for (Side side : kAllSides) {
    if (!s.empty()) s += "; ";
    s += std::string(SideName(side)) + " " + SideStateLabel(c.sides[static_cast<int>(side)]);
  }
  return s;
}

std::string CaseFigure(const CaseSummary& c, bool show_radiographer) {
  const std::string where = c.exam + ", " + (c.room.empty() ? "(no station name)" : c.room) +
                            (show_radiographer ? ", " + c.radiographer : "");
  const std::string excess = FormatPercent(100.0 * c.excess_fraction, 0);
  std::string s = "<figure class=\"case\">\n";
  if (!c.thumbnail_png.empty()) {
    s += "<img src=\"data:image/png;base64," + Base64Encode(c.thumbnail_png) + "\" alt=\"" +
         Escape("Radiograph of case " + c.case_id + " (" + where + ") with the measured field "
                "drawn on it: " + excess + " of the field lies outside the anatomy; " +
                SidesSentence(c) + ".") +
         "\">\n";
  } else {
    s += "<div class=\"missing\" role=\"img\" aria-label=\"" +
         Escape("No picture for case " + c.case_id + ": " + c.thumbnail_note) + "\"><p>" +
         Escape("Picture not available: " + c.thumbnail_note +
                ". The measurements below still apply.") +
         "</p></div>\n";
  }
  s += "<figcaption><span class=\"id\">" + Escape(c.case_id) + "</span> \u00b7 " + Escape(where) +
       "<br>Excess: <strong>" + excess + "</strong> of the field" +
       (c.avoidable_kap_dgy_cm2 ? " \u00b7 avoidable KAP about " + Kap(*c.avoidable_kap_dgy_cm2)
                                : std::string()) +
       "<br>Sides: " + Escape(SidesSentence(c)) + "</figcaption>\n</figure>\n";
  return s;
}

std::string OverlayLegend() {
  std::string s = "<div class=\"legend\"><p class=\"meta\">How to read the pictures:</p><ul>\n";
  auto item = [&s](const std::string& sample, const char* text) {
    s += "<li>" + sample + "<span>" + text + "</span></li>\n";
  };
  item(LegendSample(pal::kBorderVisible, "", false, false), "field border visible (solid)");
  item(LegendSample(pal::kBorderNotVisible, "7 4", false, false), "no border visible (dashed)");
  item(LegendSample(pal::kBorderClipped, "", true, false), "anatomy clipped (comb)");
  item(LegendSample(pal::kBorderNotAssessable, "7 3 2 3", false, false),
       "masked or cropped, not assessable (dash-dot)");
  item(LegendSample(pal::kAnatomyBox, "2 3", false, false), "anatomy box (dotted)");
  item(LegendSample(pal::kExcess, "", false, true), "excess exposed area (hatched)");
  return s + "</ul><p class=\"meta\">Labels in the pictures: L, R, T, B are the left, right, top "
             "and bottom edges of the image as displayed.</p></div>\n";
}

}  // namespace beamtrim::report_internal
