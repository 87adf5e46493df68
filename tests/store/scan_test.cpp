// The scan engine with a fake measurer: resume, interruption (stop flag and a real SIGKILL of a
// child process), duplicates, errors, full store, threads, progress output.
#include <doctest/doctest.h>

#include <signal.h>
#include <sqlite3.h>
#include <sys/inotify.h>
#include <sys/wait.h>
#include <unistd.h>

#include <fstream>
#include <map>
#include <sstream>
#include <thread>

#include "beamtrim/dicom.h"
#include "beamtrim/measure.h"
#include "store_fixtures.h"

using namespace beamtrim;
using namespace beamtrim::testing;

namespace {

// Reads "key=value" lines written by WriteFakeImage and turns them into a record. Files with
// "corrupt" give an error record, "throw" makes the measurer throw, "kill" (in a child
// process only) kills the process mid-measurement like kill -9 would.
class FakeMeasurer : public ImageMeasurer {
 public:
  MeasuredImage Measure(const std::filesystem::path& file) const override {
    ++calls;
    std::ifstream in(file);
    std::map<std::string, std::string> kv;
    for (std::string line; std::getline(in, line);) {
      auto eq = line.find('=');
      if (eq != std::string::npos) kv[line.substr(0, eq)] = line.substr(eq + 1);
    }
    if (kv.count("kill")) ::raise(SIGKILL);
    if (kv.count("throw")) throw std::runtime_error("synthetic failure");
    RecordSpec spec;
    if (kv.count("corrupt")) {
      spec.sop = "";
      spec.status = RecordStatus::kError;
      spec.reason = file.string() + ": (7FE0,0010) Pixel Data: truncated";
    } else {
      spec.sop = kv["sop"];
      spec.operator_name = kv["op"];
      spec.outcome = kv["outcome"];
      spec.excess_fraction = std::stod(kv["excess"]);
    }
    return MakeImage(spec, file.string());
  }
  mutable std::atomic<int> calls{0};
};

void WriteFakeImage(const std::filesystem::path& file, int i, const std::string& extra = "") {
  std::ostringstream out;
  out << "sop=1.2.826.0.1.3680043.9.7777." << i << "\nop=RT-0" << i % 3
      << "\noutcome=" << (i % 4 == 0 ? "needs review" : "acceptable")
      << "\nexcess=" << (i % 10) / 10.0 << "\n" << extra;
  WriteFile(file, out.str());
}

std::vector<std::filesystem::path> MakeFiles(const TempDir& dir, int n) {
  std::filesystem::create_directories(dir / "in");
  std::vector<std::filesystem::path> files;
  for (int i = 0; i < n; ++i) {
    files.push_back(dir / "in" / ("img" + std::to_string(1000 + i) + ".dcm"));
    WriteFakeImage(files.back(), i);
  }
  return files;
}

// Every stored row as text, minus the row id and the time of storing: equal stores give equal
// vectors regardless of write order.
std::vector<std::string> Rows(const std::filesystem::path& store, const std::string& table) {
  sqlite3* db = nullptr;
  sqlite3_open_v2(store.c_str(), &db, SQLITE_OPEN_READONLY, nullptr);
  sqlite3_stmt* stmt = nullptr;
  std::vector<std::string> rows;
  std::string sql = "SELECT * FROM " + table + " ORDER BY file_path";
  REQUIRE(sqlite3_prepare_v2(db, sql.c_str(), -1, &stmt, nullptr) == SQLITE_OK);
  while (sqlite3_step(stmt) == SQLITE_ROW) {
    std::string row;
    for (int c = 0; c < sqlite3_column_count(stmt); ++c) {
      std::string name = sqlite3_column_name(stmt, c);
      if (name == "id" || name == "stored_utc" || name == "image_id") continue;
      const unsigned char* text = sqlite3_column_text(stmt, c);
      row += name + "=" + (text ? reinterpret_cast<const char*>(text) : "NULL") + "|";
    }
    rows.push_back(row);
  }
  sqlite3_finalize(stmt);
  sqlite3_close(db);
  return rows;
}

// Stores compared row by row share one key, so their keyed hashes agree.
std::unique_ptr<Store> OpenOrFail(const std::filesystem::path& file, StoreOptions options = {}) {
  if (options.key_file.empty()) options.key_file = file.parent_path() / "shared.key";
  auto store = Store::Open(file, options);
  REQUIRE_MESSAGE(store.ok(), (store.ok() ? "" : store.error().ToString()));
  return std::move(store.value());
}

ScanOptions Options(int threads, size_t batch = 8) {
  ScanOptions options;
  options.threads = threads;
  options.batch_size = batch;
  return options;
}

ScanSummary ScanOrFail(const std::vector<std::filesystem::path>& files, Store& store,
                       const ImageMeasurer& measurer, const ScanOptions& options,
                       const std::atomic<bool>* stop = nullptr) {
  ScanProgress quiet;
  auto summary = ScanFiles(files, store, measurer, options, quiet, stop);
  REQUIRE(summary.ok());
  return *summary;
}

// Stops the scan once `after` files have reached the writer.
class StopAfter : public ScanProgress {
 public:
  StopAfter(std::atomic<bool>& stop, int64_t after) : stop_(stop), after_(after) {}
  void OnFile(const ScanEvent&, int64_t done, int64_t) override {
    if (done >= after_) stop_ = true;
  }

 private:
  std::atomic<bool>& stop_;
  int64_t after_;
};

// How many times `body` opens `file`, counted by the kernel (inotify(7), IN_OPEN).
template <class Body>
int CountOpens(const std::filesystem::path& file, Body body) {
  int fd = ::inotify_init1(IN_NONBLOCK | IN_CLOEXEC);
  REQUIRE(fd >= 0);
  REQUIRE(::inotify_add_watch(fd, file.c_str(), IN_OPEN) >= 0);
  body();
  int opens = 0;
  alignas(inotify_event) char buffer[4096];
  for (ssize_t n; (n = ::read(fd, buffer, sizeof buffer)) > 0;) {
    for (char* p = buffer; p < buffer + n;) {
      auto* event = reinterpret_cast<inotify_event*>(p);
      opens += (event->mask & IN_OPEN) != 0;
      p += sizeof(inotify_event) + event->len;
    }
  }
  ::close(fd);
  return opens;
}

}  // namespace

TEST_CASE("UnreadableFilesAreReadOnceAndRecordedAsMeasureFileRecordsThem") {
  // The broken-file corpus (testdata/broken, scripts/make-broken-corpus.sh). For every file the
  // reader refuses, the scan's measurer must open it no more often than one ReadRadiograph does
  // (it used to read it a second time through Measurer::MeasureFile), and give the same record.
  RegisterDicomCodecs();
  auto measurer = Measurer::Create({});
  REQUIRE(measurer.ok());
  auto dicom = MakeDicomMeasurer(*measurer);
  TempDir dir;
  int refused = 0;
  for (const auto& entry :
       std::filesystem::directory_iterator(std::string(BEAMTRIM_SOURCE_DIR) + "/testdata/broken")) {
    if (entry.path().extension() != ".dcm") continue;
    // A private copy: nothing else opens it while its opens are counted.
    auto file = dir / entry.path().filename().string();
    std::filesystem::copy_file(entry.path(), file);
    bool readable = true;
    int read_opens = CountOpens(file, [&] { readable = ReadRadiograph(file).ok(); });
    if (readable) continue;
    ++refused;
    MeasuredImage scanned;
    int scan_opens = CountOpens(file, [&] { scanned = dicom->Measure(file); });
    INFO(file.filename().string());
    CHECK(read_opens >= 1);
    CHECK(scan_opens == read_opens);
    ImageRecord expected = measurer->MeasureFile(file);
    CHECK(scanned.record.status == expected.status);
    CHECK(scanned.record.reason == expected.reason);
    CHECK(scanned.record.file == expected.file);
    CHECK(scanned.record.software_version == expected.software_version);
  }
  CHECK(refused >= 10);  // the corpus holds dozens of files the reader must refuse
}

TEST_CASE("SecondScanSkipsUnchangedFilesAndMeasuresChangedOnes") {
  TempDir dir;
  auto files = MakeFiles(dir, 40);
  auto store = OpenOrFail(dir / "s.db");
  FakeMeasurer measurer;
  ScanSummary first = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(first.ok == 40);
  CHECK(first.already_stored == 0);
  CHECK(measurer.calls == 40);

  // Rewrite one file with new content: its size changes, so it is measured again.
  WriteFakeImage(files[5], 5, "note=rewritten\n");
  ScanSummary second = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(second.already_stored == 39);
  CHECK(second.ok == 1);
  CHECK(measurer.calls == 41);
  CHECK(store->Counts().ok == 40);
}

TEST_CASE("StoppedScanResumesToTheSameRowsAsAnUninterruptedScan") {
  TempDir dir;
  auto files = MakeFiles(dir, 120);
  FakeMeasurer measurer;
  {
    auto reference = OpenOrFail(dir / "reference.db");
    ScanOrFail(files, *reference, measurer, Options(1));
  }
  auto store = OpenOrFail(dir / "interrupted.db");
  std::atomic<bool> stop{false};
  StopAfter stopper(stop, 30);
  auto partial = ScanFiles(files, *store, measurer, Options(2), stopper, &stop);
  REQUIRE(partial.ok());
  CHECK(partial->stopped);
  int64_t stored_first = store->Counts().ok;
  CHECK(stored_first >= 30);
  CHECK(stored_first < 120);

  ScanSummary resumed = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(resumed.already_stored == stored_first);
  CHECK(resumed.ok == 120 - stored_first);
  store.reset();
  auto expected = Rows(dir / "reference.db", "images");
  auto got = Rows(dir / "interrupted.db", "images");
  REQUIRE(expected.size() == 120);
  CHECK(got == expected);
}

TEST_CASE("ScanKilledWithSigkillLosesOnlyImagesInFlightAndResumesWithoutDuplicates") {
  TempDir dir;
  auto files = MakeFiles(dir, 150);
  FakeMeasurer measurer;
  {
    auto reference = OpenOrFail(dir / "reference.db");
    ScanOrFail(files, *reference, measurer, Options(1));
  }
  // The 100th file kills the scanning process, as kill -9 would, while others are in flight.
  std::string original;
  {
    std::ifstream in(files[100]);
    original.assign(std::istreambuf_iterator<char>(in), {});
  }
  WriteFile(files[100], original + "kill=1\n");
  pid_t child = ::fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    StoreOptions shared;
    shared.key_file = dir / "shared.key";
    auto store = Store::Open(dir / "killed.db", shared);
    if (!store) ::_exit(3);
    FakeMeasurer child_measurer;
    ScanProgress quiet;
    (void)ScanFiles(files, **store, child_measurer, Options(2, 1), quiet);
    ::_exit(0);  // not reached: the measurer kills the process
  }
  int status = 0;
  ::waitpid(child, &status, 0);
  REQUIRE(WIFSIGNALED(status));
  CHECK(WTERMSIG(status) == SIGKILL);

  // Restore the file with its original bytes and time, then resume.
  WriteFile(files[100], original);
  auto store = OpenOrFail(dir / "killed.db");
  int64_t survived = store->Counts().ok;
  CHECK(survived > 0);
  CHECK(survived < 150);
  ScanSummary resumed = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(resumed.already_stored == survived);
  CHECK(store->Counts().ok == 150);
  store.reset();
  auto expected = Rows(dir / "reference.db", "images");
  auto got = Rows(dir / "killed.db", "images");
  // Modification times differ for the rewritten file; compare all rows but that one by value.
  REQUIRE(got.size() == expected.size());
  int differing = 0;
  for (size_t i = 0; i < got.size(); ++i) differing += got[i] != expected[i];
  CHECK(differing <= 1);
}

TEST_CASE("SameSopInTwoFilesIsCountedAsDuplicateOnce") {
  TempDir dir;
  auto files = MakeFiles(dir, 10);
  auto copy = dir / "in" / "copy-of-3.dcm";
  std::filesystem::copy_file(files[3], copy);
  files.push_back(copy);
  auto store = OpenOrFail(dir / "s.db");
  FakeMeasurer measurer;
  ScanSummary summary = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(summary.duplicates == 1);
  CHECK(store->Counts().ok == 10);
  CHECK(store->Counts().duplicates == 1);
  // The duplicate is known on the next run too.
  ScanSummary again = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(again.already_stored == 11);
}

TEST_CASE("BadFilesAreRecordedWithReasonAndRetriedOnlyOnRequest") {
  TempDir dir;
  auto files = MakeFiles(dir, 6);
  WriteFile(files[1], "corrupt=1\n");
  WriteFile(files[2], "throw=1\n");
  files.push_back(dir / "in" / "vanished.dcm");  // listed, then gone before measuring
  auto store = OpenOrFail(dir / "s.db");
  FakeMeasurer measurer;
  ScanSummary summary = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(summary.ok == 4);
  CHECK(summary.failed == 3);
  CHECK(summary.reasons.at("(7FE0,0010) Pixel Data: truncated") == 1);
  CHECK(summary.reasons.at("internal error while measuring: synthetic failure") == 1);
  CHECK(summary.reasons.at("No such file or directory") == 1);
  CHECK(store->Counts().error == 3);
  std::string text = FormatSummary(summary);
  CHECK(text.find("4 ok, 0 skipped, 3 failed") != std::string::npos);
  CHECK(text.find("1 x (7FE0,0010) Pixel Data: truncated") != std::string::npos);

  int calls = measurer.calls;
  ScanSummary again = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(again.already_stored == 6);  // the vanished file has no identity to match
  CHECK(measurer.calls == calls);
  ScanOptions retry = Options(2);
  retry.retry_errors = true;
  ScanSummary retried = ScanOrFail(files, *store, measurer, retry);
  CHECK(retried.failed == 3);
  CHECK(measurer.calls == calls + 2);
}

TEST_CASE("FullStoreEndsScanWithClearMessageKeepsRowsAndResumes") {
  TempDir dir;
  auto files = MakeFiles(dir, 300);
  int64_t empty_pages = 0;
  {
    auto store = OpenOrFail(dir / "s.db");
    std::error_code ec;
    empty_pages = static_cast<int64_t>(std::filesystem::file_size(dir / "s.db", ec) / 4096);
  }
  FakeMeasurer measurer;
  StoreOptions limited;
  // PRAGMA max_page_count stands in for a full disk: room for some, not all, 300 records.
  limited.max_page_count = empty_pages + 40;
  ScanSummary summary;
  int64_t kept = 0;
  {
    auto store = OpenOrFail(dir / "s.db", limited);
    summary = ScanOrFail(files, *store, measurer, Options(2));
    kept = store->Counts().ok;
  }
  REQUIRE(summary.store_error.has_value());
  CHECK(summary.store_error->reason.find("SQLITE_FULL") != std::string::npos);
  CHECK(summary.store_error->file == (dir / "s.db").string());
  CHECK(summary.ok == kept);
  CHECK(kept > 0);
  CHECK(FormatSummary(summary).find("scan ended early") != std::string::npos);
  // A batch that ended early tells the user how to resume it.
  CHECK(FormatSummary(summary).find("run the same command again") != std::string::npos);

  auto store = OpenOrFail(dir / "s.db");
  ScanSummary resumed = ScanOrFail(files, *store, measurer, Options(2));
  CHECK(resumed.already_stored == kept);
  CHECK(store->Counts().ok == 300);
}

TEST_CASE("MeasureAndStoreIsSafeFromSeveralThreads") {
  TempDir dir;
  auto files = MakeFiles(dir, 80);
  auto store = OpenOrFail(dir / "s.db");
  FakeMeasurer measurer;
  std::atomic<int> failures{0};
  std::vector<std::thread> threads;
  for (int t = 0; t < 4; ++t) {
    // Every thread offers every file: each is stored once, the rest are already stored.
    threads.emplace_back([&] {
      for (const auto& f : files) {
        auto event = MeasureAndStore(*store, measurer, f);
        if (!event.ok()) ++failures;
      }
    });
  }
  for (auto& t : threads) t.join();
  CHECK(failures == 0);
  CHECK(store->Counts().ok == 80);
  CHECK(store->Counts().duplicates == 0);
}

TEST_CASE("PlainProgressPrintsALineEveryIntervalWithRateAndTimeLeft") {
  struct FakeClock : Clock {
    std::chrono::steady_clock::time_point now{};
    std::chrono::steady_clock::time_point Now() const override { return now; }
  } clock;
  std::ostringstream out;
  ConsoleProgress progress(out, false, clock, std::chrono::seconds(5));
  progress.OnStart(100);
  for (int i = 1; i <= 20; ++i) {
    clock.now += std::chrono::seconds(1);  // one file per second
    progress.OnFile(ScanEvent{}, i, 100);
  }
  std::string text = out.str();
  // Lines at 5, 10, 15 and 20 s; at 20 s: 20 done, 1 file/s, 80 left -> 80 s = 1m20s.
  size_t lines = 0;
  for (size_t p = 0; (p = text.find("scan: ", p)) != std::string::npos; ++p) ++lines;
  CHECK(lines == 1 + 4);  // the start line plus four progress lines
  CHECK(text.find("scan: 20/100 files (20.0 %), 1.0 files/s, about 1m20s left") !=
        std::string::npos);
  CHECK(text.find('\r') == std::string::npos);
}

TEST_CASE("TerminalProgressRedrawsOneBarAndPrintsErrorsAboveIt") {
  struct FakeClock : Clock {
    std::chrono::steady_clock::time_point now{};
    std::chrono::steady_clock::time_point Now() const override { return now; }
  } clock;
  std::ostringstream out;
  ConsoleProgress progress(out, true, clock);
  progress.OnStart(4);
  ScanEvent bad;
  bad.status = RecordStatus::kError;
  bad.file = "/x/b.dcm";
  bad.reason = "/x/b.dcm: not DICOM";
  for (int i = 1; i <= 4; ++i) {
    clock.now += std::chrono::seconds(2);
    progress.OnFile(i == 2 ? bad : ScanEvent{}, i, 4);
  }
  ScanSummary summary;
  summary.files = 4;
  summary.ok = 3;
  summary.failed = 1;
  progress.OnFinish(summary);
  std::string text = out.str();
  CHECK(text.find("error: /x/b.dcm: not DICOM\n") != std::string::npos);
  CHECK(text.find("\r\033[K[##############################] 4/4  0.5/s  0s left") !=
        std::string::npos);
  CHECK(text.find("3 ok, 0 skipped, 1 failed") != std::string::npos);
}

// BatchMemory: the period is a count of finished images over all threads, so exactly
// images / every calls trim, whichever threads make them (common practice, no single source:
// a shared atomic counter modulo the period). The memory given back itself is the C
// library's business (glibc malloc_trim) and is measured by bench_scan, not asserted here.
TEST_CASE("BatchMemoryTrimsOncePerPeriodOfFinishedImagesAcrossThreads") {
  BatchMemory memory(16);
  std::atomic<int> trimmed{0};
  std::vector<std::thread> threads;
  for (int t = 0; t < 4; ++t) {
    threads.emplace_back([&] {
      for (int i = 0; i < 100; ++i) {
        if (memory.ImageDone()) ++trimmed;
      }
    });
  }
  for (std::thread& t : threads) t.join();
  CHECK(memory.images() == 400);
  CHECK(memory.trims() == 400 / 16);
  CHECK(trimmed.load() == 400 / 16);

  BatchMemory never(0);
  for (int i = 0; i < 50; ++i) CHECK_FALSE(never.ImageDone());
  CHECK(never.trims() == 0);
}

// Trimming between images must not change what is stored: the same files scanned with an
// extra trim after every image and without give the same rows (the allocator only decides
// where memory comes from; common practice, no single source).
TEST_CASE("ScanRowsAreTheSameWithAndWithoutTrimmingAfterEveryImage") {
  TempDir dir;
  auto files = MakeFiles(dir, 40);
  // Calls ImageDone after each image, as the scan's workers do, so trims fall between images.
  class Trimming : public ImageMeasurer {
   public:
    Trimming(const ImageMeasurer& inner, BatchMemory& memory) : inner_(inner), memory_(memory) {}
    MeasuredImage Measure(const std::filesystem::path& file) const override {
      MeasuredImage m = inner_.Measure(file);
      memory_.ImageDone();
      return m;
    }

   private:
    const ImageMeasurer& inner_;
    BatchMemory& memory_;
  };
  FakeMeasurer fake;
  BatchMemory every_image(1);
  Trimming trimming(fake, every_image);
  {
    auto trimmed = OpenOrFail(dir / "trimmed.db");
    ScanOrFail(files, *trimmed, trimming, Options(2));
    auto plain = OpenOrFail(dir / "plain.db");
    ScanOrFail(files, *plain, fake, Options(2));
  }
  CHECK(every_image.trims() == 40);
  auto expected = Rows(dir / "plain.db", "images");
  auto got = Rows(dir / "trimmed.db", "images");
  REQUIRE(expected.size() == 40);
  CHECK(got == expected);
}
