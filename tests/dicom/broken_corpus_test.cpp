// Every file of the broken-file corpus (testdata/broken/, made by scripts/make-broken-corpus.sh)
// and every kept fuzzing finding (testdata/fuzz-regressions/) must give a clear error naming
// the file, in bounded time and memory. Each file is read in a child process so that a crash,
// a hang or a runaway allocation fails this test instead of the whole suite. Findings of the
// whole-measurement target (fuzz_measure-*) are replayed through the Measurer, as fuzzed.
#include <doctest/doctest.h>

#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <filesystem>
#include <string>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/measure.h"

namespace fs = std::filesystem;

namespace {

constexpr int kChildSaysError = 10;
constexpr int kChildSaysOk = 11;
constexpr int kChildErrorWithoutFile = 12;
constexpr unsigned kSecondsPerFile = 60;          // a hang shows as SIGALRM
constexpr long kMaxResidentKiB = 1024L * 1024L;   // 1 GiB: no allocation from a lying header

std::vector<fs::path> CorpusFiles(const char* folder) {
  std::vector<fs::path> files;
  fs::path dir = fs::path(BEAMTRIM_SOURCE_DIR) / "testdata" / folder;
  if (!fs::exists(dir)) return files;
  for (const auto& entry : fs::directory_iterator(dir)) {
    if (entry.is_regular_file()) files.push_back(entry.path());
  }
  std::sort(files.begin(), files.end());
  return files;
}

struct ChildOutcome {
  int exit_code = -1;
  int signal = 0;
  long max_rss_kib = 0;
};

// Exit code, signal and peak memory of a finished child.
ChildOutcome WaitForChild(pid_t pid) {
  ChildOutcome outcome;
  int status = 0;
  struct rusage usage {};
  wait4(pid, &status, 0, &usage);
  if (WIFEXITED(status)) outcome.exit_code = WEXITSTATUS(status);
  if (WIFSIGNALED(status)) outcome.signal = WTERMSIG(status);
  outcome.max_rss_kib = usage.ru_maxrss;
  return outcome;
}

ChildOutcome ReadInChild(const fs::path& file) {
  pid_t pid = fork();
  if (pid == 0) {
    alarm(kSecondsPerFile);
    beamtrim::Result<beamtrim::Radiograph> r = beamtrim::ReadRadiograph(file);
    if (r.ok()) _exit(kChildSaysOk);
    std::string text = r.error().ToString();
    _exit(text.find(file.filename().string()) != std::string::npos && !r.error().reason.empty()
              ? kChildSaysError
              : kChildErrorWithoutFile);
  }
  return WaitForChild(pid);
}

// The per-image pipeline as fuzz/fuzz_measure.cpp drives it: a record always, and a reason
// whenever the record is not ok (a skipped image's reason need not repeat the file name).
ChildOutcome MeasureInChild(const fs::path& file) {
  pid_t pid = fork();
  if (pid == 0) {
    alarm(kSecondsPerFile);
    beamtrim::MeasureOptions options;
    options.read.max_pixels = 1'000'000;  // as in fuzz/fuzz_measure.cpp
    auto measurer = beamtrim::Measurer::Create(options);
    if (!measurer) _exit(kChildErrorWithoutFile);
    beamtrim::ImageRecord record = measurer->MeasureFile(file);
    if (record.status == beamtrim::RecordStatus::kOk) _exit(kChildSaysOk);
    _exit(record.reason.empty() ? kChildErrorWithoutFile : kChildSaysError);
  }
  return WaitForChild(pid);
}

bool FromMeasureTarget(const fs::path& file) {
  return file.filename().string().rfind("fuzz_measure-", 0) == 0;
}

}  // namespace

TEST_CASE("EveryBrokenCorpusFileGivesAClearErrorInBoundedTimeAndMemory") {
  std::vector<fs::path> files = CorpusFiles("broken");
  REQUIRE_MESSAGE(files.size() >= 40, "run scripts/make-broken-corpus.sh");
  for (const fs::path& file : files) {
    CAPTURE(file.filename().string());
    ChildOutcome outcome = ReadInChild(file);
    CHECK(outcome.signal == 0);
    CHECK(outcome.exit_code == kChildSaysError);
    CHECK(outcome.max_rss_kib < kMaxResidentKiB);
  }
}

TEST_CASE("FuzzingFindingsStayFixed") {
  // A kept finding may be readable once fixed; it must neither crash nor hang nor say nothing.
  for (const fs::path& file : CorpusFiles("fuzz-regressions")) {
    CAPTURE(file.filename().string());
    ChildOutcome outcome = FromMeasureTarget(file) ? MeasureInChild(file) : ReadInChild(file);
    CHECK(outcome.signal == 0);
    CHECK((outcome.exit_code == kChildSaysError || outcome.exit_code == kChildSaysOk));
    CHECK(outcome.max_rss_kib < kMaxResidentKiB);
  }
}
