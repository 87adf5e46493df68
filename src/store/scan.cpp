// The scan engine: measuring workers -> bounded queue -> one writer in small transactions.
#include "beamtrim/scan.h"

#include "store/scan_internal.h"

#if defined(__GLIBC__)
#include <malloc.h>
#endif
#if defined(__linux__)
#include <sched.h>
#endif

#include <condition_variable>
#include <deque>
#include <exception>
#include <mutex>
#include <thread>

namespace beamtrim {
namespace {

// A measured (or already stored) file on its way to the writer.
struct WorkItem {
  MeasuredImage image;
  FileIdentity identity;
  bool already_stored = false;
};

// Bounded multi-producer, single-consumer queue. Producers block while it is full, which is
// what keeps memory flat when measuring is faster than writing.
class BoundedQueue {
 public:
  explicit BoundedQueue(size_t capacity) : capacity_(capacity) {}

  void Push(WorkItem item) {
    std::unique_lock lock(mutex_);
    not_full_.wait(lock, [&] { return items_.size() < capacity_; });
    items_.push_back(std::move(item));
    not_empty_.notify_one();
  }
  // Waits for at least one item; takes up to `max`. Empty result = producers done and empty.
  std::vector<WorkItem> PopSome(size_t max) {
    std::unique_lock lock(mutex_);
    not_empty_.wait(lock, [&] { return !items_.empty() || producers_left_ == 0; });
    std::vector<WorkItem> out;
    while (!items_.empty() && out.size() < max) {
      out.push_back(std::move(items_.front()));
      items_.pop_front();
    }
    not_full_.notify_all();
    return out;
  }
  void SetProducers(int n) {
    std::lock_guard lock(mutex_);
    producers_left_ = n;
  }
  void ProducerDone() {
    std::lock_guard lock(mutex_);
    --producers_left_;
    not_empty_.notify_all();
  }

 private:
  size_t capacity_;
  std::mutex mutex_;
  std::condition_variable not_full_, not_empty_;
  std::deque<WorkItem> items_;
  int producers_left_ = 0;
};

// Cores this process may run on: the affinity mask (taskset, a container's cpuset) when
// known, which can be fewer than the machine's (std::thread::hardware_concurrency).
int UsableCores() {
#if defined(__linux__)
  cpu_set_t set;
  CPU_ZERO(&set);
  if (sched_getaffinity(0, sizeof set, &set) == 0 && CPU_COUNT(&set) > 0) return CPU_COUNT(&set);
#endif
  return static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
}

MeasuredImage FailedImage(const std::filesystem::path& file, const std::string& reason) {
  MeasuredImage image;
  image.record.file = file.string();
  image.record.status = RecordStatus::kError;
  image.record.reason = reason;
  return image;
}

MeasuredImage SafeMeasure(const ImageMeasurer& measurer, const std::filesystem::path& file) {
  try {
    MeasuredImage image = measurer.Measure(file);
    if (image.record.file.empty()) image.record.file = file.string();
    return image;
  } catch (const std::exception& e) {
    return FailedImage(file, file.string() + ": internal error while measuring: " + e.what());
  } catch (...) {
    return FailedImage(file, file.string() + ": internal error while measuring");
  }
}

// Decides whether the file must be measured; fills `item` either way.
Status Prepare(Store& store, const ImageMeasurer& measurer, const std::filesystem::path& file,
               bool retry_errors, WorkItem* item) {
  auto identity = StatFile(file);
  if (!identity) {
    // Recorded as an error so the summary and later runs know about it.
    item->identity = {file.string(), -1, -1};
    item->image = FailedImage(file, identity.error().ToString());
    return Status::Ok();
  }
  item->identity = *identity;
  auto known = store.Find(identity->path);
  if (!known) return known.error();
  if (*known && (*known)->identity == *identity &&
      !(retry_errors && (*known)->status == RecordStatus::kError)) {
    item->already_stored = true;
    item->image.record.file = file.string();
    item->image.record.status = (*known)->status;
    return Status::Ok();
  }
  item->image = SafeMeasure(measurer, file);
  return Status::Ok();
}

ScanEvent EventFor(const WorkItem& item, std::optional<PutOutcome> outcome) {
  ScanEvent event;
  event.file = item.identity.path;
  event.status = item.image.record.status;
  event.reason = item.image.record.reason;
  event.already_stored = item.already_stored;
  event.duplicate = outcome == PutOutcome::kDuplicate;
  return event;
}

void Count(const ScanEvent& event, ScanSummary* summary) {
  if (event.already_stored) {
    ++summary->already_stored;
    return;
  }
  if (event.duplicate) ++summary->duplicates;
  switch (event.status) {
    case RecordStatus::kOk: ++summary->ok; break;
    case RecordStatus::kSkipped: ++summary->skipped; break;
    case RecordStatus::kError: ++summary->failed; break;
  }
  if (event.status != RecordStatus::kOk) ++summary->reasons[ReasonKey(event.file, event.reason)];
}

}  // namespace

// glibc's allocator is the one in use: not under AddressSanitizer, which replaces malloc
// and free with its own, so that glibc's malloc_trim would walk arenas nothing allocated
// from (a crash under ASan, seen on a two-thread scan) and mallopt would tune nothing.
#if defined(__SANITIZE_ADDRESS__)
#define BEAMTRIM_GLIBC_MALLOC 0
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define BEAMTRIM_GLIBC_MALLOC 0
#endif
#endif
#if !defined(BEAMTRIM_GLIBC_MALLOC)
#if defined(__GLIBC__)
#define BEAMTRIM_GLIBC_MALLOC 1
#else
#define BEAMTRIM_GLIBC_MALLOC 0
#endif
#endif

void TuneAllocatorForBatch() {
#if BEAMTRIM_GLIBC_MALLOC
  // glibc returns a freed block above the mmap threshold (128 KiB at first, then raised
  // dynamically) to the system at once, and trims the heap top above the trim threshold; an
  // image of a few MiB and its working copies are then mapped and faulted in anew per image.
  // A fixed threshold at glibc's maximum (32 MiB on 64-bit) and a trim threshold above any
  // image's working set keep that memory for the next image. The peak stays that of one
  // image per thread: nothing accumulates with the number of images.
  static std::once_flag once;
  std::call_once(once, [] {
    mallopt(M_MMAP_THRESHOLD, 32 * 1024 * 1024);
    mallopt(M_TRIM_THRESHOLD, 256 * 1024 * 1024);
  });
#endif
}

BatchMemory::BatchMemory(int every) : every_(every) {}

bool BatchMemory::ImageDone() {
  const int64_t n = ++images_;
  if (every_ <= 0 || n % every_ != 0) return false;
#if BEAMTRIM_GLIBC_MALLOC
  malloc_trim(0);
#endif
  ++trims_;
  return true;
}

Status ScanOptions::Validate() const {
  if (inputs.empty()) return MakeError(ErrorKind::kInvalidInput, "", "no input paths", "PATH");
  if (store_file.empty()) return MakeError(ErrorKind::kInvalidInput, "", "required", "--store");
  if (threads < 0) return MakeError(ErrorKind::kInvalidInput, "", "must be 0 or more", "--threads");
  if (batch_size == 0) return MakeError(ErrorKind::kInvalidInput, "", "must be at least 1", "batch size");
  return Status::Ok();
}

std::string ReasonKey(const std::string& file, const std::string& reason) {
  std::string key = reason;
  if (!file.empty() && key.rfind(file, 0) == 0) {
    key.erase(0, file.size());
    while (!key.empty() && (key.front() == ':' || key.front() == ' ')) key.erase(0, 1);
  }
  return key.empty() ? "(no reason given)" : key;
}

Result<ScanSummary> ScanFiles(const std::vector<std::filesystem::path>& files, Store& store,
                              const ImageMeasurer& measurer, const ScanOptions& options,
                              ScanProgress& progress, const std::atomic<bool>* stop) {
  return store_internal::RunScan(files, {}, store, measurer, options, progress, stop);
}

Result<ScanSummary> store_internal::RunScan(const std::vector<std::filesystem::path>& files,
                                            std::vector<Error> problems, Store& store,
                                            const ImageMeasurer& measurer,
                                            const ScanOptions& options, ScanProgress& progress,
                                            const std::atomic<bool>* stop) {
  TuneAllocatorForBatch();
  auto started = std::chrono::steady_clock::now();
  int threads = options.threads > 0 ? options.threads : UsableCores();
  size_t capacity = options.queue_capacity ? options.queue_capacity : 4 * size_t(threads);
  ScanSummary summary;
  summary.files = static_cast<int64_t>(files.size());
  summary.problems = std::move(problems);
  progress.OnStart(summary.files);
  for (const Error& problem : summary.problems) progress.OnProblem(problem);

  BoundedQueue queue(capacity);
  std::atomic<size_t> next{0};
  std::atomic<bool> halt{false};  // set by the writer when the store fails
  std::mutex error_mutex;
  std::optional<Error> lookup_error;
  auto stopping = [&] { return halt.load() || (stop && stop->load()); };

  BatchMemory memory;
  queue.SetProducers(threads);
  std::vector<std::thread> workers;
  for (int t = 0; t < threads; ++t) {
    workers.emplace_back([&] {
      for (size_t i; !stopping() && (i = next.fetch_add(1)) < files.size();) {
        WorkItem item;
        if (Status s = Prepare(store, measurer, files[i], options.retry_errors, &item); !s) {
          std::lock_guard lock(error_mutex);
          if (!lookup_error) lookup_error = s.error();
          halt = true;
          break;
        }
        const bool measured = !item.already_stored;
        queue.Push(std::move(item));
        if (measured) memory.ImageDone();
      }
      queue.ProducerDone();
    });
  }

  int64_t done = 0;
  std::vector<std::pair<MeasuredImage, FileIdentity>> batch;
  std::vector<PutOutcome> outcomes;
  for (std::vector<WorkItem> items; !(items = queue.PopSome(std::max<size_t>(1, options.batch_size))).empty();) {
    batch.clear();
    for (WorkItem& item : items) {
      if (!item.already_stored) batch.emplace_back(std::move(item.image), item.identity);
    }
    bool written = false;
    if (!batch.empty() && !summary.store_error) {
      Status s = store.PutBatch(batch, &outcomes);
      written = s.ok();
      if (!s) {
        summary.store_error = s.error();
        halt = true;
      }
    }
    size_t b = 0;
    for (WorkItem& item : items) {
      std::optional<PutOutcome> outcome;
      if (!item.already_stored) {
        if (!written) {
          ++summary.not_stored;
          ++b;
          continue;
        }
        item.image = std::move(batch[b].first);
        outcome = outcomes[b++];
      }
      ScanEvent event = EventFor(item, outcome);
      Count(event, &summary);
      progress.OnFile(event, ++done, summary.files);
    }
  }
  for (std::thread& worker : workers) worker.join();
  if (lookup_error && !summary.store_error) summary.store_error = lookup_error;
  summary.stopped = stop && stop->load();
  summary.seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  progress.OnFinish(summary);
  return summary;
}

Result<ScanEvent> MeasureAndStore(Store& store, const ImageMeasurer& measurer,
                                  const std::filesystem::path& file, bool retry_errors) {
  WorkItem item;
  if (Status s = Prepare(store, measurer, file, retry_errors, &item); !s) return s.error();
  if (item.already_stored) return EventFor(item, std::nullopt);
  auto outcome = store.Put(item.image, item.identity);
  if (!outcome) return outcome.error();
  return EventFor(item, *outcome);
}

}  // namespace beamtrim
