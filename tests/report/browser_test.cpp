// The reports in a real browser: headless Chromium loads each page offline, takes a
// screenshot and dumps the DOM; its log (--enable-logging=stderr --v=0) must show no console
// error. Chromium is installed by scripts/setup.sh; the test fails with a clear message when
// it is missing rather than passing silently.
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <regex>
#include <sstream>
#include <string>

#include <doctest/doctest.h>

#include "beamtrim/report.h"
#include "report/fixtures.h"

namespace beamtrim {
namespace {

namespace fs = std::filesystem;
const fs::path kChromium = "/usr/bin/chromium";

std::string ReadAll(const fs::path& file) {
  std::ifstream in(file, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

void WriteAll(const fs::path& file, const std::string& text) {
  std::ofstream(file, std::ios::binary) << text;
}

struct BrowserRun {
  std::string dom;
  std::string log;
  fs::path screenshot;
};

// Two headless runs (screenshot, then DOM dump), each with a fresh profile and no network.
BrowserRun Render(const fs::path& html, const fs::path& dir) {
  const std::string common =
      kChromium.string() + " --headless --no-sandbox --disable-gpu --disable-quic --no-first-run"
      " --disable-background-networking --disable-component-update --disable-sync"
      " --hide-scrollbars --enable-logging=stderr --v=0 --window-size=1280,2600";
  const std::string url = "file://" + fs::absolute(html).string();
  BrowserRun run;
  run.screenshot = dir / (html.stem().string() + ".png");
  fs::remove(run.screenshot);
  const std::string shot = common + " --user-data-dir=" + (dir / "profile-a").string() +
                           " --screenshot=" + run.screenshot.string() + " '" + url + "' > /dev/null 2> " +
                           (dir / "shot.log").string();
  const std::string dump = common + " --user-data-dir=" + (dir / "profile-b").string() +
                           " --dump-dom '" + url + "' > " + (dir / "dom.html").string() + " 2> " +
                           (dir / "dom.log").string();
  CHECK(std::system(shot.c_str()) == 0);
  CHECK(std::system(dump.c_str()) == 0);
  run.dom = ReadAll(dir / "dom.html");
  run.log = ReadAll(dir / "shot.log") + ReadAll(dir / "dom.log");
  fs::remove_all(dir / "profile-a");
  fs::remove_all(dir / "profile-b");
  return run;
}

// Console errors as Chromium logs them: uncaught exceptions, console.error, failed or refused
// loads (an external resource would fail offline).
bool HasConsoleError(const std::string& log) {
  static const std::regex kError(
      R"(Uncaught|:ERROR:CONSOLE|CONSOLE\(\d+\)\] "(Error|Failed|Refused)|net::ERR_)");
  return std::regex_search(log, kError);
}

// Embedded PNG thumbnails of at least 1000 base64 characters followed by an alt text. Plain
// string search: std::regex recurses once per character and overflows the stack on such runs.
long CountThumbnails(const std::string& dom) {
  const std::string head = "<img src=\"data:image/png;base64,";
  const std::string base64 =
      "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/=";
  long count = 0;
  for (size_t at = dom.find(head); at != std::string::npos; at = dom.find(head, at + 1)) {
    const size_t start = at + head.size();
    const size_t end = dom.find_first_not_of(base64, start);
    if (end == std::string::npos || end - start < 1000) continue;
    if (dom.compare(end, 7, "\" alt=\"") == 0) ++count;
  }
  return count;
}

fs::path WorkDir(const std::string& name) {
  fs::path dir = fs::current_path() / name;
  fs::remove_all(dir);
  fs::create_directories(dir);
  return dir;
}

}  // namespace

TEST_CASE("ConsoleErrorScanDetectsAnUncaughtError") {
  REQUIRE_MESSAGE(fs::exists(kChromium), "Chromium missing: run scripts/setup.sh");
  const fs::path dir = WorkDir("browser-control");
  WriteAll(dir / "broken.html", "<!DOCTYPE html><html lang=en><title>x</title><p>x"
                                "<script>no_such_function();</script></html>");
  BrowserRun run = Render(dir / "broken.html", dir);
  CHECK(HasConsoleError(run.log));
}

TEST_CASE("ReportRendersOfflineInChromiumWithChartsAndThumbnails") {
  REQUIRE_MESSAGE(fs::exists(kChromium), "Chromium missing: run scripts/setup.sh");
  const fs::path dir = WorkDir("browser-report");
  ReportModel m = testing::MakeSampleModel();
  WriteAll(dir / "report.html", RenderReportHtml(m));
  WriteAll(dir / "feedback.html", RenderFeedbackHtml(m, m.sheets[0]));

  BrowserRun report = Render(dir / "report.html", dir);
  CHECK_FALSE(HasConsoleError(report.log));
  REQUIRE(fs::exists(report.screenshot));
  CHECK(fs::file_size(report.screenshot) > 50'000);  // a blank page compresses to a few kB
  // The DOM as the browser built it: three charts, thumbnails as data: URIs, the placeholder.
  const std::regex svg(R"(<svg id="chart-)");
  CHECK(std::distance(std::sregex_iterator(report.dom.begin(), report.dom.end(), svg),
                      std::sregex_iterator()) == 3);
  CHECK(CountThumbnails(report.dom) == static_cast<long>(m.worst.size() - 1));
  CHECK(report.dom.find("Picture not available") != std::string::npos);

  BrowserRun sheet = Render(dir / "feedback.html", dir);
  CHECK_FALSE(HasConsoleError(sheet.log));
  CHECK(fs::file_size(sheet.screenshot) > 50'000);
  CHECK(sheet.dom.find("<svg id=\"chart-trend\"") != std::string::npos);
}

TEST_CASE("FeedbackSheetPrintsToPdf") {
  REQUIRE_MESSAGE(fs::exists(kChromium), "Chromium missing: run scripts/setup.sh");
  const fs::path dir = WorkDir("browser-pdf");
  ReportModel m = testing::MakeSampleModel();
  WriteAll(dir / "sheet.html", RenderFeedbackHtml(m, m.sheets[1]));
  Status printed = PrintToPdf(dir / "sheet.html", dir / "sheet.pdf");
  REQUIRE_MESSAGE(printed.ok(), printed.error().ToString());
  const std::string pdf = ReadAll(dir / "sheet.pdf");
  CHECK(pdf.rfind("%PDF-", 0) == 0);
  // A4 is 595 x 842 points (ISO 216: 210 x 297 mm at 72 points per inch).
  CHECK(std::regex_search(pdf, std::regex(R"(/MediaBox\s*\[\s*0\s+0\s+59[45](\.\d+)?\s+84[12](\.\d+)?)")));
}

TEST_CASE("PdfWithoutChromiumIsAClearNotFound") {
  const fs::path dir = WorkDir("browser-nopdf");
  WriteAll(dir / "x.html", "<!DOCTYPE html><title>x</title>");
  Status s = PrintToPdf(dir / "x.html", dir / "x.pdf", dir / "no-such-chromium");
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().kind == ErrorKind::kNotFound);
  CHECK(s.error().reason.find("Chromium") != std::string::npos);
}

}  // namespace beamtrim
