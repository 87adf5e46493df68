// `beamtrim pull`: Study Root C-FIND by date range and modality, then C-GET (or C-MOVE to a
// short-lived Storage SCP) of the instances the store does not have yet.
#include <algorithm>
#include <charconv>
#include <memory>
#include <thread>

#include <dcmtk/dcmdata/dcdeftag.h>
#include <dcmtk/dcmdata/dcuid.h>
#include <dcmtk/dcmnet/scu.h>
#include <spdlog/spdlog.h>

#include "net/net_internal.h"

namespace beamtrim {
namespace {

// Frees DCMTK's response lists on every path.
template <class T>
struct ResponseList {
  OFList<T*> items;
  ~ResponseList() {
    for (T* item : items) delete item;
  }
};

// The Q/R SCU; C-STORE sub-operations of a C-GET land in the spool.
class PullScu : public DcmSCU {
 public:
  explicit PullScu(const Spool& spool) : spool_(spool) {}

  std::vector<std::filesystem::path> TakeWritten() { return std::exchange(written_, {}); }
  int write_failures() const { return write_failures_; }

 protected:
  OFCondition handleSTORERequest(const T_ASC_PresentationContextID pres_id,
                                 DcmDataset* incoming, OFBool& continue_session,
                                 Uint16& status) override {
    std::unique_ptr<DcmDataset> dataset(incoming);
    continue_session = OFTrue;
    if (!dataset) {
      status = STATUS_STORE_Error_CannotUnderstand;
      return DIMSE_NULLKEY;
    }
    OFString abstract_syntax, transfer_syntax;
    findPresentationContext(pres_id, abstract_syntax, transfer_syntax);
    E_TransferSyntax xfer = DcmXfer(transfer_syntax.c_str()).getXfer();
    Result<CommitResult> written = net::WriteToSpool(spool_, *dataset, xfer);
    if (!written.ok()) {
      ++write_failures_;
      spdlog::error("pull: {}", written.error().ToString());
      status = STATUS_STORE_Refused_OutOfResources;
      return EC_Normal;
    }
    if (std::find(written_.begin(), written_.end(), written->path) == written_.end()) {
      written_.push_back(written->path);
    }
    status = STATUS_Success;
    return EC_Normal;
  }

 private:
  const Spool& spool_;
  std::vector<std::filesystem::path> written_;
  int write_failures_ = 0;
};

struct SeriesEntry {
  std::string series_uid;
  std::vector<std::string> instances;
};

std::string Get(DcmDataset* dataset, const DcmTagKey& tag) {
  OFString value;
  if (dataset != nullptr) dataset->findAndGetOFStringArray(tag, value);
  return value.c_str();
}

bool ModalityWanted(const std::string& modalities_value, const std::vector<std::string>& wanted) {
  if (modalities_value.empty()) return true;  // the archive did not say: look at the series
  size_t start = 0;
  while (start <= modalities_value.size()) {
    size_t end = modalities_value.find('\\', start);
    if (end == std::string::npos) end = modalities_value.size();
    std::string one = modalities_value.substr(start, end - start);
    if (std::find(wanted.begin(), wanted.end(), one) != wanted.end()) return true;
    start = end + 1;
  }
  return false;
}

Error NetworkError(const PullOptions& options, const std::string& what, const OFCondition& cond) {
  return MakeError(ErrorKind::kNetwork,
                   options.archive.ae_title + "@" + options.archive.host + ":" +
                       std::to_string(options.archive.port),
                   what + ": " + net::ConditionText(cond));
}

class Puller {
 public:
  Puller(const PullOptions& options, const Spool& spool, const SpoolSink& sink,
         const std::atomic<bool>& stop)
      : options_(options), spool_(spool), sink_(sink), stop_(stop), scu_(spool) {}

  Status Connect() {
    scu_.setAETitle(options_.our_ae.c_str());
    scu_.setPeerHostName(options_.archive.host.c_str());
    scu_.setPeerPort(options_.archive.port);
    scu_.setPeerAETitle(options_.archive.ae_title.c_str());
    scu_.setACSETimeout(static_cast<Uint32>(options_.acse_timeout_s));
    scu_.setDIMSETimeout(static_cast<Uint32>(options_.dimse_timeout_s));
    scu_.setDIMSEBlockingMode(DIMSE_NONBLOCKING);
    scu_.setStorageMode(DCMSCU_STORAGE_DISK);
    OFList<OFString> plain = net::UncompressedTransferSyntaxes();
    scu_.addPresentationContext(UID_FINDStudyRootQueryRetrieveInformationModel, plain);
    if (UseMove()) {
      scu_.addPresentationContext(UID_MOVEStudyRootQueryRetrieveInformationModel, plain);
    } else {
      scu_.addPresentationContext(UID_GETStudyRootQueryRetrieveInformationModel, plain);
      // One context per compressed syntax, so the archive can send each object as stored.
      for (const std::string& sop_class : net::RadiographStorageClasses()) {
        scu_.addPresentationContext(sop_class.c_str(), plain, ASC_SC_ROLE_SCP);
        for (const std::string& syntax : net::CompressedTransferSyntaxes()) {
          OFList<OFString> one;
          one.push_back(syntax.c_str());
          scu_.addPresentationContext(sop_class.c_str(), one, ASC_SC_ROLE_SCP);
        }
      }
    }
    OFCondition cond = scu_.initNetwork();
    if (cond.good()) cond = scu_.negotiateAssociation();
    if (cond.bad()) return NetworkError(options_, "association refused or failed", cond);
    find_id_ = scu_.findPresentationContextID(UID_FINDStudyRootQueryRetrieveInformationModel, "");
    retrieve_id_ = scu_.findPresentationContextID(
        UseMove() ? UID_MOVEStudyRootQueryRetrieveInformationModel
                  : UID_GETStudyRootQueryRetrieveInformationModel,
        "");
    if (find_id_ == 0 || retrieve_id_ == 0) {
      return MakeError(ErrorKind::kNetwork, options_.archive.ae_title,
                       std::string("archive did not accept Study Root C-FIND and ") +
                           (UseMove() ? "C-MOVE" : "C-GET"));
    }
    return Status::Ok();
  }

  void Close() {
    if (scu_.isConnected()) scu_.releaseAssociation();
  }

  Result<std::vector<std::string>> FindStudies() {
    DcmDataset query;
    query.putAndInsertString(DCM_QueryRetrieveLevel, "STUDY");
    query.putAndInsertString(DCM_StudyInstanceUID, "");
    query.putAndInsertString(DCM_StudyDate,
                             (options_.from_date + "-" + options_.to_date).c_str());
    query.putAndInsertString(DCM_ModalitiesInStudy, "");
    ResponseList<QRResponse> responses;
    OFCondition cond = scu_.sendFINDRequest(find_id_, &query, &responses.items);
    if (cond.bad()) return NetworkError(options_, "study query failed", cond);
    std::vector<std::string> studies;
    for (QRResponse* response : responses.items) {
      if (!DICOM_PENDING_STATUS(response->m_status) || response->m_dataset == nullptr) continue;
      std::string uid = Get(response->m_dataset, DCM_StudyInstanceUID);
      if (uid.empty()) continue;
      // The date is checked here too: an archive may ignore or loosen the range key.
      std::string date = Get(response->m_dataset, DCM_StudyDate);
      if (!date.empty() && (date < options_.from_date || date > options_.to_date)) continue;
      if (!ModalityWanted(Get(response->m_dataset, DCM_ModalitiesInStudy), options_.modalities)) {
        continue;
      }
      if (std::find(studies.begin(), studies.end(), uid) == studies.end()) {
        studies.push_back(uid);
      }
    }
    return studies;
  }

  Result<std::vector<SeriesEntry>> FindSeries(const std::string& study_uid) {
    DcmDataset query;
    query.putAndInsertString(DCM_QueryRetrieveLevel, "SERIES");
    query.putAndInsertString(DCM_StudyInstanceUID, study_uid.c_str());
    query.putAndInsertString(DCM_SeriesInstanceUID, "");
    query.putAndInsertString(DCM_Modality, "");
    ResponseList<QRResponse> responses;
    OFCondition cond = scu_.sendFINDRequest(find_id_, &query, &responses.items);
    if (cond.bad()) return NetworkError(options_, "series query failed", cond);
    std::vector<SeriesEntry> series;
    for (QRResponse* response : responses.items) {
      if (!DICOM_PENDING_STATUS(response->m_status) || response->m_dataset == nullptr) continue;
      std::string modality = Get(response->m_dataset, DCM_Modality);
      if (!ModalityWanted(modality, options_.modalities)) continue;
      series.push_back({Get(response->m_dataset, DCM_SeriesInstanceUID), {}});
    }
    for (SeriesEntry& entry : series) {
      Result<std::vector<std::string>> instances = FindInstances(study_uid, entry.series_uid);
      if (!instances.ok()) return instances.error();
      entry.instances = std::move(instances.value());
    }
    return series;
  }

  // Retrieves one series, or only its missing instances; returns the number retrieved.
  Status Retrieve(const std::string& study_uid, const SeriesEntry& series,
                  const std::vector<std::string>& missing, PullProgress& progress) {
    if (missing.size() == series.instances.size()) {
      return RetrieveOne(study_uid, series.series_uid, "", progress);
    }
    for (const std::string& instance : missing) {
      if (stop_.load()) break;
      if (Status status = RetrieveOne(study_uid, series.series_uid, instance, progress);
          !status.ok()) {
        return status;
      }
    }
    return Status::Ok();
  }

  bool UseMove() const { return !options_.move_destination.empty(); }
  PullScu& scu() { return scu_; }

 private:
  Result<std::vector<std::string>> FindInstances(const std::string& study_uid,
                                                 const std::string& series_uid) {
    DcmDataset query;
    query.putAndInsertString(DCM_QueryRetrieveLevel, "IMAGE");
    query.putAndInsertString(DCM_StudyInstanceUID, study_uid.c_str());
    query.putAndInsertString(DCM_SeriesInstanceUID, series_uid.c_str());
    query.putAndInsertString(DCM_SOPInstanceUID, "");
    ResponseList<QRResponse> responses;
    OFCondition cond = scu_.sendFINDRequest(find_id_, &query, &responses.items);
    if (cond.bad()) return NetworkError(options_, "instance query failed", cond);
    std::vector<std::string> instances;
    for (QRResponse* response : responses.items) {
      if (!DICOM_PENDING_STATUS(response->m_status) || response->m_dataset == nullptr) continue;
      std::string uid = Get(response->m_dataset, DCM_SOPInstanceUID);
      if (!uid.empty()) instances.push_back(uid);
    }
    return instances;
  }

  Status RetrieveOne(const std::string& study_uid, const std::string& series_uid,
                     const std::string& instance_uid, PullProgress& progress) {
    DcmDataset keys;
    keys.putAndInsertString(DCM_QueryRetrieveLevel, instance_uid.empty() ? "SERIES" : "IMAGE");
    keys.putAndInsertString(DCM_StudyInstanceUID, study_uid.c_str());
    keys.putAndInsertString(DCM_SeriesInstanceUID, series_uid.c_str());
    if (!instance_uid.empty()) keys.putAndInsertString(DCM_SOPInstanceUID, instance_uid.c_str());
    ResponseList<RetrieveResponse> responses;
    OFCondition cond =
        UseMove() ? scu_.sendMOVERequest(retrieve_id_, options_.move_destination.c_str(), &keys,
                                         &responses.items)
                  : scu_.sendCGETRequest(retrieve_id_, &keys, &responses.items);
    if (cond.bad()) return NetworkError(options_, "retrieve failed", cond);
    if (!responses.items.empty()) {
      const RetrieveResponse* last = responses.items.back();
      progress.images_failed += last->m_numberOfFailedSubops;
      if (last->m_status != STATUS_Success && last->m_numberOfFailedSubops == 0 &&
          !DICOM_WARNING_STATUS(last->m_status)) {
        spdlog::warn("pull: retrieve ended with status 0x{:04x}", last->m_status);
        ++progress.images_failed;
      }
    }
    return Status::Ok();
  }

  const PullOptions& options_;
  const Spool& spool_;
  const SpoolSink& sink_;
  const std::atomic<bool>& stop_;
  PullScu scu_;
  T_ASC_PresentationContextID find_id_ = 0;
  T_ASC_PresentationContextID retrieve_id_ = 0;
};

// Only the store decides what is already here: a file in the spool without a store row was
// offered to the sink by ConsumePending at the start and failed there. An instance counts as
// here when the store has its record, or when its spool file is recorded: the latter covers
// images recorded as errors (unmeasurable), which would otherwise be fetched on every run.
bool AlreadyHave(const SpoolSink& sink, const Spool& spool, const std::string& uid) {
  if (sink.has_instance && sink.has_instance(uid)) return true;
  const std::filesystem::path file = spool.ReceivedPath(uid);
  std::error_code ec;
  return sink.is_done && std::filesystem::exists(file, ec) && sink.is_done(file);
}

// Sub-operations of C-MOVE arrive at our own short-lived Storage SCP.
class MoveReceiver {
 public:
  MoveReceiver(const PullOptions& options, const Spool& spool, const SpoolSink& sink) {
    listen_.port = options.move_port;
    listen_.ae_title = options.move_destination;
    listen_.dimse_timeout_s = options.dimse_timeout_s;
    // Only the archive may deliver to this short-lived listener.
    listen_.allowed_calling_aets = {options.archive.ae_title};
    thread_ = std::thread([this, &spool, &sink] {
      result_ = RunStorageServer(listen_, spool, sink, stop_, [this] { listening_ = true; });
      done_ = true;
    });
    while (!listening_ && !done_) std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  bool listening() const { return listening_; }
  Result<ListenSummary> Finish() {
    stop_ = true;
    if (thread_.joinable()) thread_.join();
    return result_;
  }
  ~MoveReceiver() { (void)Finish(); }

 private:
  ListenOptions listen_;
  std::atomic<bool> stop_{false};
  std::atomic<bool> listening_{false};
  std::atomic<bool> done_{false};
  Result<ListenSummary> result_ = ListenSummary{};
  std::thread thread_;
};

}  // namespace

Result<ArchiveAddress> ParseArchiveAddress(std::string_view text) {
  size_t last = text.rfind(':');
  size_t first = last == std::string_view::npos ? last : text.rfind(':', last - 1);
  if (first == std::string_view::npos || last == 0) {
    return MakeError(ErrorKind::kInvalidInput, std::string(text), "expected HOST:PORT:AET",
                     "--archive");
  }
  ArchiveAddress address;
  address.host = std::string(text.substr(0, first));
  std::string_view port = text.substr(first + 1, last - first - 1);
  address.ae_title = std::string(text.substr(last + 1));
  unsigned value = 0;
  auto [end, ec] = std::from_chars(port.data(), port.data() + port.size(), value);
  if (address.host.empty()) {
    return MakeError(ErrorKind::kInvalidInput, std::string(text), "host is empty", "--archive");
  }
  if (ec != std::errc() || end != port.data() + port.size() || value == 0 || value > 65535) {
    return MakeError(ErrorKind::kInvalidInput, std::string(text),
                     "port must be a number 1..65535", "--archive");
  }
  if (!net::IsValidAeTitle(address.ae_title)) {
    return MakeError(ErrorKind::kInvalidInput, std::string(text),
                     "AE title must be 1..16 characters, no '\\'", "--archive");
  }
  address.port = static_cast<uint16_t>(value);
  return address;
}

Result<std::string> ParseDicomDate(std::string_view text) {
  std::string digits;
  if (text.size() == 10 && text[4] == '-' && text[7] == '-') {
    digits = std::string(text.substr(0, 4)) + std::string(text.substr(5, 2)) +
             std::string(text.substr(8, 2));
  } else {
    digits = std::string(text);
  }
  auto bad = [&] {
    return MakeError(ErrorKind::kInvalidInput, std::string(text),
                     "expected a date YYYY-MM-DD or YYYYMMDD");
  };
  if (digits.size() != 8 ||
      !std::all_of(digits.begin(), digits.end(), [](char c) { return c >= '0' && c <= '9'; })) {
    return bad();
  }
  int year = std::stoi(digits.substr(0, 4));
  int month = std::stoi(digits.substr(4, 2));
  int day = std::stoi(digits.substr(6, 2));
  static const int kDays[] = {31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
  if (month < 1 || month > 12 || day < 1 || day > kDays[month - 1]) return bad();
  bool leap = (year % 4 == 0 && year % 100 != 0) || year % 400 == 0;
  if (month == 2 && day == 29 && !leap) return bad();
  return digits;
}

Result<PullProgress> Pull(const PullOptions& options, const Spool& spool, const SpoolSink& sink,
                          const std::atomic<bool>& stop,
                          const std::function<void(const PullProgress&)>& progress_callback) {
  if (!net::IsValidAeTitle(options.our_ae)) {
    return MakeError(ErrorKind::kInvalidInput, "", "not a valid AE title", "--aet");
  }
  if (options.from_date.empty() || options.to_date.empty() || options.from_date > options.to_date) {
    return MakeError(ErrorKind::kInvalidInput, "", "need --from <= --to", "--from/--to");
  }
  // Objects fetched by an interrupted run but not recorded yet come first.
  RecoverySummary recovered = ConsumePending(spool, sink);
  if (recovered.consumed > 0) {
    spdlog::info("pull: recorded {} object(s) left from an earlier run", recovered.consumed);
  }

  Puller puller(options, spool, sink, stop);
  std::unique_ptr<MoveReceiver> receiver;
  if (puller.UseMove()) {
    receiver = std::make_unique<MoveReceiver>(options, spool, sink);
    if (!receiver->listening()) {
      Result<ListenSummary> failed = receiver->Finish();
      return failed.ok() ? MakeError(ErrorKind::kNetwork, "", "C-MOVE receiver did not start")
                         : failed.error();
    }
  }
  if (Status connected = puller.Connect(); !connected.ok()) return connected.error();

  Result<std::vector<std::string>> studies = puller.FindStudies();
  if (!studies.ok()) {
    puller.Close();
    return studies.error();
  }
  PullProgress progress;
  progress.studies_total = static_cast<int>(studies->size());
  if (progress_callback) progress_callback(progress);

  for (const std::string& study_uid : studies.value()) {
    if (stop.load()) break;
    Result<std::vector<SeriesEntry>> series = puller.FindSeries(study_uid);
    if (!series.ok()) {
      puller.Close();
      return series.error();
    }
    for (const SeriesEntry& entry : series.value()) {
      std::vector<std::string> missing;
      for (const std::string& uid : entry.instances) {
        if (AlreadyHave(sink, spool, uid)) {
          ++progress.images_skipped;
        } else {
          missing.push_back(uid);
        }
      }
      if (missing.empty() || stop.load()) continue;
      if (Status status = puller.Retrieve(study_uid, entry, missing, progress); !status.ok()) {
        puller.Close();
        return status.error();
      }
    }
    // Record what this study brought before moving on, so an interruption loses little.
    for (const std::filesystem::path& file : puller.scu().TakeWritten()) {
      Status status = net::ConsumeGuarded(sink, file);
      if (status.ok()) {
        ++progress.images_received;
      } else {
        ++progress.images_failed;
        spdlog::error("{}", status.error().ToString());
      }
    }
    ++progress.studies_done;
    if (progress_callback) progress_callback(progress);
  }
  puller.Close();
  progress.images_failed += puller.scu().write_failures();
  if (receiver) {
    Result<ListenSummary> received = receiver->Finish();
    if (!received.ok()) return received.error();
    progress.images_received += received->objects_consumed;
    progress.images_failed += received->consume_failures + received->objects_failed;
  }
  return progress;
}

}  // namespace beamtrim
