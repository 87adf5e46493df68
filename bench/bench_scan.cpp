// Scan throughput and memory: images per second through `Scan` (read + measure + store) and
// through a decode-only pass (ReadRadiograph: DCMTK load + decompress) on the same synthetic
// files, with 1 and 2 threads; peak memory (ru_maxrss) of each pass measured in a child process
// so passes do not inherit each other's peaks. Not a test: prints figures for
// docs/performance.md. A store-write pass times Store::PutBatch alone on constructed records.
// Usage:
//   bench_scan [--dir DIR] [--small N] [--full N] [--threads 1,2] [--uncompressed 0|1]
//              [--records N] [--stages N] [--generate-only 1] [--counts 25,50,100,200]
//              [--field N] [--field-repeat R]
// DIR keeps the generated images between runs (default: a folder under /tmp); the images are
// the generator's usual mix of transfer syntaxes, and `--uncompressed 1` (the default) adds
// rows for the uncompressed files among them. `--stages N` times read, field, anatomy and
// metrics separately on the first N files of each set (CPU time, one thread). `--counts`
// replaces the tables by the memory curve: for each count, the decode-only pass and the scan
// on the first that many files of each set, with the last thread count, peak memory and CPU
// time per image side by side, so growth with the number of images shows in one run.
// `--field N` times field detection alone on the first N files of each set, read once and
// held in memory, run R times (`--field-repeat`, default 5), CPU ms per detection, and prints
// a digest of every result (polygon, sides, notes, bit for bit), so a speed change that alters
// any result shows as a different digest; under `perf record` it profiles the detector alone.
#include <sys/resource.h>
#include <sys/time.h>
#include <time.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <thread>
#include <vector>

#include "beamtrim/anatomy.h"
#include "beamtrim/dicom.h"
#include "beamtrim/measure.h"
#include "beamtrim/metrics.h"
#include "beamtrim/rules.h"
#include "beamtrim/scan.h"
#include "beamtrim/synth.h"

namespace fs = std::filesystem;
using namespace beamtrim;

namespace {

struct PassResult {
  double seconds = 0.0;      // wall time of the pass
  double cpu_seconds = 0.0;  // user + system time of the child (all its threads)
  int64_t images = 0;
  int64_t failed = 0;
  long max_rss_kib = 0;
};

double Seconds(const timeval& t) { return t.tv_sec + t.tv_usec / 1e6; }

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
  std::fflush(stdout);  // or the child would print the parent's buffered lines again
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
  r.cpu_seconds = Seconds(usage.ru_utime) + Seconds(usage.ru_stime);
  return r;
}

PassResult DecodeOnly(const std::vector<fs::path>& files, int threads) {
  return InChild([&] {
    RegisterDicomCodecs();
    TuneAllocatorForBatch();  // as the scan does, so the two passes differ only in measuring
    std::atomic<size_t> next{0};
    std::atomic<int64_t> failed{0};
    BatchMemory memory;  // as the scan's workers
    auto start = std::chrono::steady_clock::now();
    std::vector<std::thread> pool;
    for (int t = 0; t < threads; ++t) {
      pool.emplace_back([&] {
        for (size_t i; (i = next++) < files.size();) {
          if (!ReadRadiograph(files[i]).ok()) ++failed;
          memory.ImageDone();
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

// Where one image's time goes, one thread, in this process: read (DCMTK load + decode +
// normalise), field detection, anatomy, the rest of the metrics and the verdict. Store writes
// are timed by the store-write pass. Each stage is run once per file, in pipeline order.
void Stages(const char* set, const std::vector<fs::path>& files) {
  RegisterDicomCodecs();
  TuneAllocatorForBatch();
  auto rules = LoadRules({});
  if (!rules) return;
  // CPU time of this thread: on a shared machine it varies far less than wall time.
  struct Clock {
    static double now() {
      timespec ts{};
      clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
      return ts.tv_sec * 1e3 + ts.tv_nsec / 1e6;
    }
  };
  auto since = [](double t) { return Clock::now() - t; };
  double read = 0, field = 0, anatomy = 0, metrics = 0;
  int n = 0;
  for (const fs::path& file : files) {
    auto t = Clock::now();
    auto radiograph = ReadRadiograph(file);
    read += since(t);
    if (!radiograph) continue;
    ++n;
    t = Clock::now();
    FieldContext context = FieldContextFromHeader(radiograph->header, radiograph->linear);
    FieldMeasurement f = DetectField(radiograph->pixels, context);
    field += since(t);
    ImageRecord record;
    FillRecordContext(*radiograph, &record);
    t = Clock::now();
    AnatomyContext anatomy_context{record.pixel_spacing_mm, radiograph->linear};
    std::vector<std::string> notes;
    (void)FindAnatomy(radiograph->pixels, f, anatomy_context, {}, &notes);
    anatomy += since(t);
    t = Clock::now();
    ComputeMetrics(*radiograph, f, **rules, &record);  // anatomy again, subtracted below
    metrics += since(t);
  }
  if (n == 0) return;
  std::printf("\nstages, %s, %d images, one thread, CPU ms per image: read %.1f, field %.1f, "
              "anatomy %.1f, metrics without anatomy %.1f\n",
              set, n, read / files.size(), field / n, anatomy / n, (metrics - anatomy) / n);
  std::fflush(stdout);
}

// FNV-1a over the bytes of every value of a field measurement that the pipeline uses.
struct Digest {
  uint64_t h = 1469598103934665603ull;
  void Bytes(const void* p, size_t n) {
    const unsigned char* b = static_cast<const unsigned char*>(p);
    for (size_t i = 0; i < n; ++i) h = (h ^ b[i]) * 1099511628211ull;
  }
  void Double(double v) { Bytes(&v, sizeof v); }
  void Text(const std::string& s) { Bytes(s.data(), s.size()); Bytes("\0", 1); }
  void Field(const FieldMeasurement& f) {
    for (const Point2d& p : f.polygon_px) { Double(p.x); Double(p.y); }
    Double(f.area_px);
    Double(f.area_mm2.value_or(-1.0));
    Double(f.rotation_deg);
    Double(f.confidence);
    for (const SideMeasurement& s : f.sides) {
      Double(s.visible ? 1.0 : 0.0);
      Double(s.confidence);
      Double(s.contrast_ratio);
      Double(s.penumbra_px.value_or(-1.0));
      if (s.line_px) { Double(s.line_px->a.x); Double(s.line_px->a.y); Double(s.line_px->b.x); Double(s.line_px->b.y); }
      Text(s.reason);
    }
    Double(f.open + 2.0 * f.blanked + 4.0 * f.cropped + 8.0 * f.double_exposure);
    for (Side s : f.blanked_or_cropped_sides) Double(static_cast<double>(s));
    for (const std::string& n : f.notes) Text(n);
  }
};

// Field detection alone on images held in memory (see the usage above).
void FieldOnly(const char* set, const std::vector<fs::path>& files, int repeat) {
  RegisterDicomCodecs();
  TuneAllocatorForBatch();
  struct Input {
    Image pixels;
    FieldContext context;
  };
  std::vector<Input> inputs;
  for (const fs::path& file : files) {
    auto r = ReadRadiograph(file);
    if (!r) continue;
    FieldContext context = FieldContextFromHeader(r->header, r->linear);
    inputs.push_back({std::move(r->pixels), context});
  }
  if (inputs.empty()) return;
  timespec a{}, b{};
  Digest digest;
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &a);
  for (int rep = 0; rep < repeat; ++rep) {
    for (const Input& in : inputs) {
      FieldMeasurement f = DetectField(in.pixels, in.context);
      if (rep == 0) digest.Field(f);
    }
  }
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &b);
  const double ms = (b.tv_sec - a.tv_sec) * 1e3 + (b.tv_nsec - a.tv_nsec) / 1e6;
  std::printf("\nfield alone, %s, %zu images x %d, one thread: %.2f CPU ms per detection, "
              "results digest %016llx\n",
              set, inputs.size(), repeat, ms / (static_cast<double>(inputs.size()) * repeat),
              static_cast<unsigned long long>(digest.h));
  std::fflush(stdout);
}

// One table row. Wall-time rates and their ratio are what the issue asks for; the CPU time
// (user + system, all threads of the pass) and its ratio are given too, because on a shared
// machine wall time depends on what the others run; `load` is the 1-minute load average
// after the pass.
void Report(const char* set, int threads, const PassResult& decode, const PassResult& scan) {
  double load[1] = {0.0};
  if (getloadavg(load, 1) != 1) load[0] = -1.0;
  std::printf("| %-24s | %d | %6lld | %7.1f | %7.1f | %5.2f | %6.1f | %6.1f | %5.2f | %6.1f | "
              "%6.1f | %lld | %4.1f |\n",
              set, threads, static_cast<long long>(scan.images), decode.images / decode.seconds,
              scan.images / scan.seconds, scan.seconds / decode.seconds,
              1000.0 * decode.cpu_seconds / decode.images, 1000.0 * scan.cpu_seconds / scan.images,
              scan.cpu_seconds / decode.cpu_seconds, decode.max_rss_kib / 1024.0,
              scan.max_rss_kib / 1024.0, static_cast<long long>(scan.failed), load[0]);
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

// Transfer syntaxes whose pixel data is stored as is: for these decoding is little more than
// a copy, so their ratio shows the cost of measuring alone.
bool Uncompressed(const fs::path& file) {
  ReadOptions header_only;
  header_only.header_only = true;
  auto r = ReadRadiograph(file, header_only);
  if (!r) return false;
  const std::string& uid = r->header.transfer_syntax_uid;
  return uid == "1.2.840.10008.1.2" || uid == "1.2.840.10008.1.2.1" || uid == "1.2.840.10008.1.2.2";
}

int main(int argc, char** argv) {
  fs::path dir = fs::temp_directory_path() / "beamtrim-bench-scan";
  int small = 2000, full = 200;
  std::vector<int> threads = {1, 2};
  bool uncompressed = true;
  bool generate_only = false;
  int records = 0;
  int stages = 0;
  int field_only = 0, field_repeat = 5;
  std::vector<int> counts;
  for (int i = 1; i + 1 < argc; i += 2) {
    std::string flag = argv[i];
    if (flag == "--dir") dir = argv[i + 1];
    if (flag == "--small") small = std::atoi(argv[i + 1]);
    if (flag == "--full") full = std::atoi(argv[i + 1]);
    if (flag == "--threads") threads = ParseThreads(argv[i + 1]);
    if (flag == "--uncompressed") uncompressed = std::atoi(argv[i + 1]) != 0;
    if (flag == "--records") records = std::atoi(argv[i + 1]);
    if (flag == "--stages") stages = std::atoi(argv[i + 1]);
    if (flag == "--field") field_only = std::atoi(argv[i + 1]);
    if (flag == "--field-repeat") field_repeat = std::max(1, std::atoi(argv[i + 1]));
    if (flag == "--counts") counts = ParseThreads(argv[i + 1]);
    if (flag == "--generate-only") generate_only = std::atoi(argv[i + 1]) != 0;
  }
  struct Set {
    const char* name;
    const char* folder;
    int count;
    double pixel_mm;
  };
  // The generator's usual mix of transfer syntaxes: each fictional room's own (src/synth).
  const Set sets[] = {{"small", "small-mix", small, 0.5}, {"full-size", "full-mix", full, 0.15}};
  if (generate_only) {
    for (const Set& set : sets) {
      if (set.count > 0) EnsureBatch(dir / set.folder, set.count, set.pixel_mm, std::nullopt);
    }
    return 0;
  }
  if (field_only > 0) {
    for (const Set& set : sets) {
      if (set.count <= 0) continue;
      EnsureBatch(dir / set.folder, set.count, set.pixel_mm, std::nullopt);
      std::vector<fs::path> files = DicomFiles(dir / set.folder);
      files.resize(std::min<size_t>(files.size(), std::min(set.count, field_only)));
      FieldOnly(set.name, files, field_repeat);
    }
    return 0;
  }
  if (!counts.empty()) {
    int t = threads.empty() ? 2 : threads.back();
    std::printf("| set | threads | images | decode peak MiB | scan peak MiB | decode CPU ms/img | "
                "scan CPU ms/img | scan/decode CPU | failed | load |\n"
                "|---|---|---|---|---|---|---|---|---|---|\n");
    for (const Set& set : sets) {
      if (set.count <= 0) continue;
      EnsureBatch(dir / set.folder, set.count, set.pixel_mm, std::nullopt);
      std::vector<fs::path> all = DicomFiles(dir / set.folder);
      for (int count : counts) {
        if (count <= 0 || count > set.count || static_cast<size_t>(count) > all.size()) continue;
        std::vector<fs::path> files(all.begin(), all.begin() + count);
        PassResult decode = DecodeOnly(files, t);
        PassResult scan = FullScan(files, t, dir / "bench-store.db");
        double load[1] = {0.0};
        if (getloadavg(load, 1) != 1) load[0] = -1.0;
        std::printf("| %-9s | %d | %5d | %6.1f | %6.1f | %6.1f | %6.1f | %5.2f | %lld | %4.1f |\n",
                    set.name, t, count, decode.max_rss_kib / 1024.0, scan.max_rss_kib / 1024.0,
                    1000.0 * decode.cpu_seconds / decode.images,
                    1000.0 * scan.cpu_seconds / scan.images, scan.cpu_seconds / decode.cpu_seconds,
                    static_cast<long long>(scan.failed), load[0]);
        std::fflush(stdout);
      }
    }
    return 0;
  }
  std::printf("| set | threads | images | decode img/s | scan img/s | scan/decode wall | "
              "decode CPU ms/img | scan CPU ms/img | scan/decode CPU | decode peak MiB | "
              "scan peak MiB | failed | load |\n"
              "|---|---|---|---|---|---|---|---|---|---|---|---|---|\n");
  std::vector<std::string> memory_lines;
  for (const Set& set : sets) {
    if (set.count <= 0) continue;
    EnsureBatch(dir / set.folder, set.count, set.pixel_mm, std::nullopt);
    std::vector<fs::path> files = DicomFiles(dir / set.folder);
    files.resize(std::min<size_t>(files.size(), set.count));
    if (stages > 0) {
      // In a child, as the passes, so that no pass inherits this one's heap.
      std::vector<fs::path> some(files.begin(), files.begin() + std::min<size_t>(files.size(), stages));
      InChild([&] {
        Stages(set.name, some);
        return PassResult{};
      });
    }
    std::vector<fs::path> plain;
    if (uncompressed) {
      for (const fs::path& f : files) {
        if (Uncompressed(f)) plain.push_back(f);
      }
    }
    const std::string mix_name = std::string(set.name) + ", usual mix";
    const std::string plain_name = std::string(set.name) + ", uncompressed of it";
    PassResult last_scan;
    for (int t : threads) {
      PassResult decode = DecodeOnly(files, t);
      last_scan = FullScan(files, t, dir / "bench-store.db");
      Report(mix_name.c_str(), t, decode, last_scan);
      if (!plain.empty()) {
        Report(plain_name.c_str(), t, DecodeOnly(plain, t), FullScan(plain, t, dir / "bench-store.db"));
      }
    }
    // Memory must not grow with the number of images: a quarter of the set, with the last
    // thread count, against the whole set above.
    if (!threads.empty() && files.size() >= 8) {
      std::vector<fs::path> quarter(files.begin(), files.begin() + files.size() / 4);
      PassResult q = FullScan(quarter, threads.back(), dir / "bench-store.db");
      char line[200];
      std::snprintf(line, sizeof line, "%s, %d threads: %zu images %.1f MiB, %zu images %.1f MiB",
                    set.name, threads.back(), quarter.size(), q.max_rss_kib / 1024.0,
                    files.size(), last_scan.max_rss_kib / 1024.0);
      memory_lines.push_back(line);
    }
  }
  if (!memory_lines.empty()) std::printf("\npeak memory of the whole scan (ru_maxrss):\n");
  for (const std::string& line : memory_lines) std::printf("- %s\n", line.c_str());
  if (records > 0) StoreWrites(dir / "bench-writes.db", records, ScanOptions{}.batch_size);
  return 0;
}
