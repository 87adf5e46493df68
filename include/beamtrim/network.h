// DICOM networking: a Storage SCP that receives radiographs from modalities into a spool folder
// (`beamtrim listen`), and a Query/Retrieve SCU that pulls a date range of studies from an
// archive (`beamtrim pull`, C-FIND then C-GET or C-MOVE). Every received object is written
// atomically into the spool and then handed to a SpoolSink (normally: measure and store).
// Thread-safety: a Spool may be shared between threads; RunStorageServer and Pull block the
// calling thread and call the sink from one thread at a time. Results are value types.
#pragma once

#include <atomic>
#include <cstdint>
#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "beamtrim/status.h"

namespace beamtrim {

// File name (without folder) for a SOP Instance UID: only digits and dots are kept, leading
// and trailing dots dropped, length bounded; when anything was changed a short hash of the
// original UID is appended so that two different UIDs never share a name. Never empty, never
// "." or "..", never contains a path separator. Always ends in ".dcm".
std::string SpoolFileName(std::string_view sop_instance_uid);

// The spool: where received objects wait for, and stay after, measurement. It holds patient
// data (PHI); nothing outside it does. Layout under the root:
//   tmp/       partial writes (removed when the spool is opened: never complete objects)
//   received/  complete objects, one per SOP instance, written by rename (atomic)
class Spool {
 public:
  // Creates the folders when absent and clears tmp/. Errors name the folder.
  static Result<Spool> Open(const std::filesystem::path& root);

  const std::filesystem::path& root() const { return root_; }
  std::filesystem::path tmp_dir() const { return root_ / "tmp"; }
  std::filesystem::path received_dir() const { return root_ / "received"; }

  // Where the object with this SOP Instance UID lands (inside received/).
  std::filesystem::path ReceivedPath(std::string_view sop_instance_uid) const;
  // A fresh, unique temporary path inside tmp/ for an object being written.
  std::filesystem::path TempPath(std::string_view sop_instance_uid) const;
  // Every complete object in received/, sorted by name.
  std::vector<std::filesystem::path> ReceivedFiles() const;

 private:
  explicit Spool(std::filesystem::path root) : root_(std::move(root)) {}
  std::filesystem::path root_;
};

// How a received object was committed into received/.
enum class SpoolCommit {
  kStored,        // it is now at the requested name
  kAlreadyThere,  // a byte-identical copy was already in place: the new one was dropped
  kStoredAside,   // another object held the name (same UID, different bytes): the new one
                  // was kept beside it as "<name>-vN.dcm", so neither is lost
};
struct CommitResult {
  std::filesystem::path path;  // where the object is now
  SpoolCommit outcome = SpoolCommit::kStored;
};

// Moves a fully written temporary file into place without ever replacing a file already in
// received/: fsync the file, link it in under a name that does not exist yet (atomic: the name
// appears complete or not at all), fsync the folder. The temporary file is gone afterwards.
Result<CommitResult> CommitSpoolFile(const std::filesystem::path& temp,
                                     const std::filesystem::path& target);

// Receives each complete spool file. `consume` measures and records it; `is_done` tells
// whether a spool file is already recorded (used at start-up to find what is left to
// measure); `has_instance` tells whether a SOP instance is already recorded (used by pull to
// skip it). Calls come from one thread at a time.
struct SpoolSink {
  std::function<Status(const std::filesystem::path& file)> consume;
  std::function<bool(const std::filesystem::path& file)> is_done;
  std::function<bool(const std::string& sop_instance_uid)> has_instance;
};

// Hands every received/ file that the sink has not recorded yet to the sink (recovery after a
// crash or a kill). Returns how many were consumed; failures are logged and counted.
struct RecoverySummary {
  int consumed = 0;
  int failed = 0;
};
RecoverySummary ConsumePending(const Spool& spool, const SpoolSink& sink);

class Measurer;  // measure.h
class Store;     // store.h
// The usual sink: measure each file with `measurer` and write its record into `store` (the
// store keeps no patient identifiers; docs/store.md). Both must outlive the sink.
SpoolSink MakeStoreSink(Store& store, const Measurer& measurer);

// ---- Storage SCP -------------------------------------------------------------------------

struct ListenOptions {
  uint16_t port = 11112;            // TCP port to listen on (all interfaces)
  std::string ae_title = "BEAMTRIM";  // our AE title; associations to other called AEs are refused
  // Calling AE titles allowed to connect; empty = any. Others are refused with
  // "calling AE title not recognized" (PS3.8 9.3.4).
  std::vector<std::string> allowed_calling_aets;
  int max_associations = 4;         // concurrent associations; more are refused (transient)
  int acse_timeout_s = 30;          // association negotiation
  int dimse_timeout_s = 60;         // idle time within an association before it is aborted
  uint32_t max_pdu = 65536;         // maximum PDU we receive
};

// Checks ranges and AE title lengths (1..16 characters, no backslash or control characters).
Status ValidateListenOptions(const ListenOptions& options);

struct ListenSummary {
  int associations_accepted = 0;
  int associations_refused = 0;
  int objects_received = 0;   // committed into the spool
  int objects_failed = 0;     // refused or not written
  int objects_consumed = 0;   // handed to the sink successfully
  int consume_failures = 0;
};

// Runs the Storage SCP until `stop` becomes true, then stops accepting, lets running
// associations finish (each bounded by the DIMSE timeout), hands every received object to the
// sink and returns. `ready` (optional) is called once the port is listening.
Result<ListenSummary> RunStorageServer(const ListenOptions& options, const Spool& spool,
                                       const SpoolSink& sink, const std::atomic<bool>& stop,
                                       const std::function<void()>& ready = {});

// ---- Query / Retrieve SCU ----------------------------------------------------------------

struct ArchiveAddress {
  std::string host;
  uint16_t port = 0;
  std::string ae_title;
};
// Parses "HOST:PORT:AET". Errors name the part at fault.
Result<ArchiveAddress> ParseArchiveAddress(std::string_view text);

// "YYYYMMDD" from "YYYYMMDD" or "YYYY-MM-DD"; errors on anything else or an impossible date.
Result<std::string> ParseDicomDate(std::string_view text);

struct PullOptions {
  ArchiveAddress archive;
  std::string our_ae = "BEAMTRIM";
  std::string from_date;  // YYYYMMDD, inclusive
  std::string to_date;    // YYYYMMDD, inclusive
  std::vector<std::string> modalities = {"DX", "CR"};
  // C-MOVE instead of C-GET: the archive sends to this AE title, which it must map to this
  // host and `move_port`, where pull runs its own Storage SCP for the duration.
  std::string move_destination;
  uint16_t move_port = 0;
  int acse_timeout_s = 30;
  int dimse_timeout_s = 120;
};

struct PullProgress {
  int studies_total = 0;
  int studies_done = 0;
  int images_received = 0;
  int images_skipped = 0;  // already recorded
  int images_failed = 0;   // sub-operations the archive reported failed, or not written
};

// Finds the studies in the date range (Study Root, STUDY level) whose Modalities in Study
// intersect `modalities`, lists their instances of those modalities, retrieves the instances
// the sink does not have yet, and hands each to the sink. Re-running after an interruption
// completes without duplicates. `progress` (optional) is called after each study.
Result<PullProgress> Pull(const PullOptions& options, const Spool& spool, const SpoolSink& sink,
                          const std::atomic<bool>& stop,
                          const std::function<void(const PullProgress&)>& progress = {});

}  // namespace beamtrim
