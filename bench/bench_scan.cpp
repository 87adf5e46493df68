// Scan throughput and memory: images per second through `Scan` (read + measure + store) and
// through a decode-only pass (ReadRadiograph: DCMTK load + decompress) on the same synthetic
// files, with 1 and 2 threads; peak memory (ru_maxrss) of each pass measured in a child process
// so passes do not inherit each other's peaks. Not a test: prints figures for
// docs/performance.md. A store-write pass times Store::PutBatch alone on constructed records.
// Usage:
//   bench_scan [--dir DIR] [--small N] [--full N] [--threads 1,2] [--uncompressed 0|1]
//              [--records N]
// DIR keeps the generated images between runs (default: a folder under /tmp).
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <thread>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/measure.h"
#include "beamtrim/scan.h"
#include "beamtrim/synth.h"

namespace fs = std::filesystem;
using namespace beamtrim;

namespace {

struct PassResult {
  double seconds = 0.0;
  int64_t images = 0;
  int64_t failed = 0;
  long max_rss_kib = 0;
};

std::vector<fs::path> DicomFiles(const fs::path& dir) {
  std::vector<fs::path> files;
  for (const auto& entry : fs::directory_iterator(dir)) {
    if (entry.path().extension() == ".dcm") files.push_back(entry.path());
  }
  std::sort(files.begin(), files.end());
  return files;
}

void EnsureBatch(const fs::path& dir, int count, double pixel_mm,
                 std::optional<TransferSyntax> syntax) {
  if (fs::exists(dir / "manifest.json") && static_cast<int>(DicomFiles(dir).size()) >= count) {
    return;
  }
  std::fprintf(stderr, "generating %d images in %s ...\n", count, dir.c_str());
  SynthBatchOptions options;
  options.out_dir = dir;
  options.count = count;
  options.seed = 20261202;
  options.image.pixel_mm = pixel_mm;
  options.image.syntax = syntax;
  options.clinic = true;  // the fictional clinic's exam mix, with dates, staff and rooms
  SynthBatchResult result = WriteSynthBatch(options);
  for (const Error& e : result.errors) std::fprintf(stderr, "  %s\n", e.ToString().c_str());
}

// Runs `body` in a child process; the child writes its result through a pipe and the parent
// takes the child's own peak resident memory from wait4.
template <class Body>
PassResult InChild(Body body) {
  int fds[2];
  if (::pipe(fds) != 0) std::abort();
  pid_t pid = ::fork();
  if (pid == 0) {
    ::close(fds[0]);
    PassResult r = body();
    (void)!::write(fds[1], &r, sizeof r);
    ::_exit(0);
  }
  ::close(fds[1]);
  PassResult r;
  if (::read(fds[0], &r, sizeof r) != sizeof r) r.seconds = -1;
  ::close(fds[0]);
  int status = 0;
  struct rusage usage {};
  ::wait4(pid, &status, 0, &usage);
  r.max_rss_kib = usage.ru_maxrss;
  return r;
}

PassResult DecodeOnly(const std::vector<fs::path>& files, int threads) {
  return InChild([&] {
    RegisterDicomCodecs();
    std::atomic<size_t> next{0};
    std::atomic<int64_t> failed{0};
    auto start = std::chrono::steady_clock::now();
    std::vector<std::thread> pool;
    for (int t = 0; t < threads; ++t) {
      pool.emplace_back([&] {
        for (size_t i; (i = next++) < files.size();) {
          if (!ReadRadiograph(files[i]).ok()) ++failed;
        }
      });
    }
    for (auto& t : pool) t.join();
    PassResult r;
    r.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    r.images = static_cast<int64_t>(files.size());
    r.failed = failed;
    return r;
  });
}

// Store writes alone: `count` constructed records (synthetic, a fictional clinic) through
// PutBatch in batches of `batch`, as the scan's writer does. Prints ms per record for the
// first and the last tenth, so a cost that grows with the store shows.
void StoreWrites(const fs::path& store_file, int count, size_t batch) {
  for (const char* suffix : {"", "-wal", "-shm"}) fs::remove(store_file.string() + suffix);
  auto store = Store::Open(store_file);
  if (!store) {
    std::fprintf(stderr, "%s\n", store.error().ToString().c_str());
    return;
  }
  std::vector<std::pair<MeasuredImage, FileIdentity>> pending;
  std::vector<PutOutcome> outcomes;
  std::vector<double> seconds;  // per batch
  auto tenth = [&](size_t first, size_t last) {
    double total = 0;
    for (size_t i = first; i < last; ++i) total += seconds[i];
    return 1000.0 * total / static_cast<double>((last - first) * batch);
  };
  for (int i = 0; i < count; ++i) {
    MeasuredImage m;
    ImageRecord& r = m.record;
    r.sop_instance_uid = "1.2.826.0.1.3680043.10.4242." + std::to_string(i);
    r.file = "/archive/2026/" + std::to_string(i) + ".dcm";
    r.software_version = "bench";
    r.rows = 2800;
    r.columns = 2300;
    r.context.operator_name = "RT-" + std::to_string(10 + i % 25);
    r.context.station = "ROOM " + std::to_string(1 + i % 6);
    r.context.body_part = "CHEST";
    r.context.view = "PA";
    r.context.study_date = "202611" + std::to_string(10 + i % 18);
    r.context.month = "2026-11";
    FieldMeasurement field;
    for (Side side : kAllSides) field.side(side).side = side;
    r.field = field;
    r.excess = ExcessMeasurement{};
    r.excess->fraction_at_0mm = (i % 100) / 100.0;
    r.verdict = Verdict{};
    r.verdict->outcome = i % 3 ? "acceptable" : "needs review";
    m.accession_number = "ACC" + std::to_string(i);
    m.study_instance_uid = r.sop_instance_uid + ".1";
    pending.emplace_back(std::move(m), FileIdentity{r.file, 1000 + i, i});
    if (pending.size() == batch || i + 1 == count) {
      auto start = std::chrono::steady_clock::now();
      if (Status s = (*store)->PutBatch(pending, &outcomes); !s) {
        std::fprintf(stderr, "%s\n", s.error().ToString().c_str());
        return;
      }
      seconds.push_back(
          std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
      pending.clear();
    }
  }
  size_t n = seconds.size(), t = std::max<size_t>(1, n / 10);
  std::printf("\nstore writes: %d records, batches of %zu: %.3f ms per record overall, %.3f in "
              "the first tenth, %.3f in the last tenth\n",
              count, batch, tenth(0, n), tenth(0, t), tenth(n - t, n));
}

PassResult FullScan(const std::vector<fs::path>& files, int threads, const fs::path& store_file) {
  fs::remove(store_file);
  fs::remove(store_file.string() + "-wal");
  fs::remove(store_file.string() + "-shm");
  return InChild([&] {
    RegisterDicomCodecs();
    auto measurer = Measurer::Create({});
    auto store = Store::Open(store_file);
    if (!measurer || !store) ::_exit(2);
    auto dicom = MakeDicomMeasurer(*measurer);
    ScanOptions options;
    options.threads = threads;
    ScanProgress quiet;
    auto start = std::chrono::steady_clock::now();
    auto summary = ScanFiles(files, **store, *dicom, options, quiet);
    PassResult r;
    r.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    r.images = static_cast<int64_t>(files.size());
    r.failed = summary ? summary->failed + summary->not_stored : r.images;
    return r;
  });
}

void Report(const char* set, int threads, const PassResult& decode, const PassResult& scan) {
  double decode_rate = decode.images / decode.seconds;
  double scan_rate = scan.images / scan.seconds;
  std::printf("| %-22s | %d | %6lld | %8.1f | %8.1f | %5.2f | %7.1f | %7.1f | %lld |\n", set,
              threads, static_cast<long long>(scan.images), decode_rate, scan_rate,
              scan.seconds / decode.seconds, decode.max_rss_kib / 1024.0,
              scan.max_rss_kib / 1024.0, static_cast<long long>(scan.failed));
  std::fflush(stdout);
}

std::vector<int> ParseThreads(const std::string& text) {
  std::vector<int> out;
  size_t start = 0;
  while (start < text.size()) {
    size_t comma = text.find(',', start);
    out.push_back(std::atoi(text.substr(start, comma - start).c_str()));
    if (comma == std::string::npos) break;
    start = comma + 1;
  }
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  fs::path dir = fs::temp_directory_path() / "beamtrim-bench-scan";
  int small = 2000, full = 200;
  std::vector<int> threads = {1, 2};
  bool uncompressed = true;
  int records = 0;
  for (int i = 1; i + 1 < argc; i += 2) {
    std::string flag = argv[i];
    if (flag == "--dir") dir = argv[i + 1];
    if (flag == "--small") small = std::atoi(argv[i + 1]);
    if (flag == "--full") full = std::atoi(argv[i + 1]);
    if (flag == "--threads") threads = ParseThreads(argv[i + 1]);
    if (flag == "--uncompressed") uncompressed = std::atoi(argv[i + 1]) != 0;
    if (flag == "--records") records = std::atoi(argv[i + 1]);
  }
  struct Set {
    const char* name;
    int count;
    double pixel_mm;
    std::optional<TransferSyntax> syntax;
  };
  const Set sets[] = {
      {"small, usual mix", small, 0.5, std::nullopt},
      {"full-size, usual mix", full, 0.15, std::nullopt},
      {"small, uncompressed", small, 0.5, TransferSyntax::kExplicitLittle},
      {"full-size, uncompressed", full, 0.15, TransferSyntax::kExplicitLittle},
  };
  std::printf("| set | threads | images | decode-only img/s | scan img/s | scan / decode time "
              "| decode peak MiB | scan peak MiB | failed |\n|---|---|---|---|---|---|---|---|---|\n");
  for (const Set& set : sets) {
    if (set.count <= 0 || (set.syntax && !uncompressed)) continue;
    fs::path sub = dir / (std::string(set.name).substr(0, set.name[0] == 's' ? 5 : 9) +
                          (set.syntax ? "-explicit" : "-mix"));
    EnsureBatch(sub, set.count, set.pixel_mm, set.syntax);
    std::vector<fs::path> files = DicomFiles(sub);
    files.resize(std::min<size_t>(files.size(), set.count));
    for (int t : threads) {
      PassResult decode = DecodeOnly(files, t);
      PassResult scan = FullScan(files, t, dir / "bench-store.db");
      Report(set.name, t, decode, scan);
    }
  }
  // Memory must not grow with the number of images: scan a quarter, then all, of the small set.
  std::vector<fs::path> files =
      fs::exists(dir / "small-mix") ? DicomFiles(dir / "small-mix") : std::vector<fs::path>{};
  files.resize(std::min<size_t>(files.size(), std::max(small, 0)));
  if (!files.empty()) {
    std::vector<fs::path> quarter(files.begin(), files.begin() + files.size() / 4);
    PassResult a = FullScan(quarter, 2, dir / "bench-store.db");
    PassResult b = FullScan(files, 2, dir / "bench-store.db");
    std::printf("\npeak memory, 2 threads, small set: %lld images %.1f MiB, %lld images %.1f MiB\n",
                static_cast<long long>(a.images), a.max_rss_kib / 1024.0,
                static_cast<long long>(b.images), b.max_rss_kib / 1024.0);
  }
  if (records > 0) StoreWrites(dir / "bench-writes.db", records, ScanOptions{}.batch_size);
  return 0;
}
