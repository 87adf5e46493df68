// Batch scan: measure many radiographs in parallel and record every result in the Store.
// Measuring workers feed one writer (the calling thread) through a bounded queue, so memory
// stays flat in the number of files and the store has a single writer. ScanProgress callbacks
// run on the calling thread only. MeasureAndStore() is safe to call from several threads.
#pragma once

#include <atomic>
#include <chrono>
#include <cstdint>
#include <filesystem>
#include <map>
#include <memory>
#include <optional>
#include <ostream>
#include <string>
#include <vector>

#include "beamtrim/measure.h"
#include "beamtrim/store.h"

namespace beamtrim {

// What a scan needs from the measuring pipeline: one file in, one record plus the identifiers
// to hash out. Must be thread-safe and never throw (a throw is still caught and recorded).
class ImageMeasurer {
 public:
  virtual ~ImageMeasurer() = default;
  virtual MeasuredImage Measure(const std::filesystem::path& file) const = 0;
};

// The real pipeline: ReadRadiograph once, keep the header's accession number and study UID,
// then Measurer::MeasureRadiograph. Files that fail to read get the record MeasureFile gives.
std::unique_ptr<ImageMeasurer> MakeDicomMeasurer(const Measurer& measurer);

struct ScanOptions {
  std::vector<std::filesystem::path> inputs;  // files, folders (recursive) and DICOMDIRs
  std::filesystem::path store_file;           // required
  std::filesystem::path key_file;             // empty = "<store>.key"
  std::filesystem::path rules_file;           // empty = shipped default rules
  int threads = 0;                            // measuring threads; 0 = all cores
  // Files stored with status "error" are measured again only with this flag (docs/store.md).
  bool retry_errors = false;
  size_t batch_size = 32;      // records per store transaction at most (1 = one per record)
  size_t queue_capacity = 0;   // measured records waiting for the writer; 0 = 4 x threads

  // Errors name the option at fault.
  Status Validate() const;
};

// One file as the writer saw it.
struct ScanEvent {
  std::string file;
  RecordStatus status = RecordStatus::kOk;
  std::string reason;           // for skipped and error
  bool already_stored = false;  // unchanged since an earlier run: not measured again
  bool duplicate = false;       // same SOP instance already stored from another file
};

struct ScanSummary {
  int64_t files = 0;           // inputs found
  int64_t already_stored = 0;  // skipped because an earlier run stored them
  int64_t ok = 0;              // measured and stored this run, by status
  int64_t skipped = 0;
  int64_t failed = 0;
  int64_t duplicates = 0;      // noted, not stored twice
  int64_t not_stored = 0;      // measured but not written (the store failed or a stop)
  std::map<std::string, int64_t> reasons;  // skip and error reasons, counted
  std::vector<Error> problems;             // inputs that could not be walked
  std::optional<Error> store_error;        // the store failed: the scan ended early
  bool stopped = false;                    // a stop was requested
  double seconds = 0.0;
};

// Receives progress on the calling thread, in order.
class ScanProgress {
 public:
  virtual ~ScanProgress() = default;
  virtual void OnStart(int64_t total_files) {}
  virtual void OnProblem(const Error& problem) {}
  virtual void OnFile(const ScanEvent& event, int64_t done, int64_t total) {}
  virtual void OnFinish(const ScanSummary& summary) {}
};

// Time source for progress output, so tests can fake it.
class Clock {
 public:
  virtual ~Clock() = default;
  virtual std::chrono::steady_clock::time_point Now() const = 0;
};
const Clock& SystemClock();

// Progress for people. On a terminal: one redrawn bar with count, rate and time left; else a
// plain line every `plain_interval`. Errors are printed as they occur (file and reason), up to
// `max_error_lines`; the summary lists every reason with its count.
class ConsoleProgress : public ScanProgress {
 public:
  ConsoleProgress(std::ostream& out, bool terminal, const Clock& clock = SystemClock(),
                  std::chrono::milliseconds plain_interval = std::chrono::seconds(5));
  void OnStart(int64_t total_files) override;
  void OnProblem(const Error& problem) override;
  void OnFile(const ScanEvent& event, int64_t done, int64_t total) override;
  void OnFinish(const ScanSummary& summary) override;

  int max_error_lines = 50;

 private:
  void Draw(int64_t done, int64_t total, bool final_line);
  void ClearBar();
  std::ostream& out_;
  bool terminal_;
  const Clock& clock_;
  std::chrono::milliseconds plain_interval_;
  std::chrono::steady_clock::time_point start_{}, last_draw_{};
  int errors_printed_ = 0;
  bool bar_visible_ = false;
};

// "12m05s"-style duration.
std::string FormatDuration(double seconds);
// The summary as printed at the end of a scan (several lines, no trailing newline).
std::string FormatSummary(const ScanSummary& summary);
// A reason without its leading file name, so equal reasons from different files count together.
std::string ReasonKey(const std::string& file, const std::string& reason);

// Makes the C allocator keep freed blocks of up to 32 MiB for reuse instead of returning
// them to the system after each image, so every image's pixel buffers reuse memory already
// mapped rather than faulting fresh pages in (a large share of the measuring time
// otherwise; docs/performance.md). Process-wide (glibc mallopt; nothing elsewhere, nor
// under AddressSanitizer, whose allocator replaces glibc's);
// idempotent; the scan calls it, and so should any pass that is compared with a scan.
void TuneAllocatorForBatch();

// Bounds the memory a batch keeps: every `every` finished images, the C allocator's free
// memory is given back to the system (glibc malloc_trim). With TuneAllocatorForBatch the
// allocator keeps freed image buffers for reuse, and images of different sizes fragment its
// heaps, so without this the resident memory creeps up with the number of images
// (docs/performance.md). Trimming after every image would fault the pages in again for each
// one; every `every` images costs that once per `every`. The default period is long: the
// curve was already flat at 200 images without it, so it is only a bound for batches of
// thousands, and at 128 its cost is about 1/8 of the +7 % measured at 16. Thread-safe: any worker calls
// ImageDone(); the call that completes a period trims. `every` <= 0 never trims.
class BatchMemory {
 public:
  static constexpr int kDefaultEvery = 128;
  explicit BatchMemory(int every = kDefaultEvery);
  // One image finished; true when this call trimmed.
  bool ImageDone();
  int64_t images() const { return images_.load(); }
  int64_t trims() const { return trims_.load(); }

 private:
  int every_;
  std::atomic<int64_t> images_{0};
  std::atomic<int64_t> trims_{0};
};

// Scans the given files into an open store. `stop` (optional) ends the scan early: files not
// yet started are left for the next run; measured ones are still written.
Result<ScanSummary> ScanFiles(const std::vector<std::filesystem::path>& files, Store& store,
                              const ImageMeasurer& measurer, const ScanOptions& options,
                              ScanProgress& progress, const std::atomic<bool>* stop = nullptr);

// The whole scan: load the rules, walk the inputs, open (or create) the store, scan.
// Returns an error only when nothing could start (bad options, rules, store); problems met
// on the way are in the summary.
Result<ScanSummary> Scan(const ScanOptions& options, ScanProgress& progress,
                         const std::atomic<bool>* stop = nullptr);

// Measures one file and stores it, unless the unchanged file is already stored. For services
// that receive images one at a time; safe to call from several threads on one Store.
Result<ScanEvent> MeasureAndStore(Store& store, const ImageMeasurer& measurer,
                                  const std::filesystem::path& file, bool retry_errors = false);

}  // namespace beamtrim
