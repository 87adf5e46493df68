// The Storage SCP behind `beamtrim listen`: an accept loop on the DICOM port, one worker thread
// per association (a DcmThreadSCP that writes each object into the spool), and one consumer
// thread that hands committed spool files to the sink, so measuring never holds up a sender.
#include <sys/socket.h>

#include <algorithm>
#include <chrono>
#include <condition_variable>
#include <deque>
#include <list>
#include <memory>
#include <mutex>
#include <thread>

#include <dcmtk/dcmnet/assoc.h>
#include <dcmtk/dcmnet/dcmtrans.h>
#include <dcmtk/dcmnet/dimse.h>
#include <dcmtk/dcmnet/dul.h>
#include <dcmtk/dcmnet/scpthrd.h>
#include <spdlog/spdlog.h>

#include "net/net_internal.h"

namespace beamtrim {
namespace {

// Hands committed files to the sink on its own thread, in arrival order.
class ConsumerQueue {
 public:
  explicit ConsumerQueue(const SpoolSink& sink) : sink_(sink), thread_([this] { Loop(); }) {}
  ~ConsumerQueue() { Finish(); }

  void Push(std::filesystem::path file) {
    {
      std::lock_guard lock(mutex_);
      queue_.push_back(std::move(file));
    }
    wake_.notify_one();
  }

  // Consumes everything queued, then stops the thread.
  void Finish() {
    {
      std::lock_guard lock(mutex_);
      closing_ = true;
    }
    wake_.notify_one();
    if (thread_.joinable()) thread_.join();
  }

  int consumed() const { return consumed_; }
  int failed() const { return failed_; }

 private:
  void Loop() {
    for (;;) {
      std::filesystem::path file;
      {
        std::unique_lock lock(mutex_);
        wake_.wait(lock, [this] { return closing_ || !queue_.empty(); });
        if (queue_.empty()) return;  // closing and drained
        file = std::move(queue_.front());
        queue_.pop_front();
      }
      if (sink_.is_done && sink_.is_done(file)) continue;
      Status status = net::ConsumeGuarded(sink_, file);
      if (status.ok()) {
        ++consumed_;
      } else {
        ++failed_;
        spdlog::error("{}", status.error().ToString());
      }
    }
  }

  const SpoolSink& sink_;
  std::mutex mutex_;
  std::condition_variable wake_;
  std::deque<std::filesystem::path> queue_;
  bool closing_ = false;
  std::atomic<int> consumed_{0};
  std::atomic<int> failed_{0};
  std::thread thread_;  // last: starts after the members it uses exist
};

// State shared by the accept loop and every association worker.
struct ServerContext {
  const ListenOptions& options;
  const Spool& spool;
  ConsumerQueue& queue;
  std::atomic<int> accepted{0};
  std::atomic<int> refused{0};
  std::atomic<int> received{0};
  std::atomic<int> failed{0};
};

class ReceiverScp : public DcmThreadSCP {
 public:
  explicit ReceiverScp(ServerContext& context) : context_(context) {}

 protected:
  OFCondition handleIncomingCommand(T_DIMSE_Message* message,
                                    const DcmPresentationContextInfo& info) override {
    if (message->CommandField != DIMSE_C_STORE_RQ) {
      return DcmThreadSCP::handleIncomingCommand(message, info);  // C-ECHO and refusals
    }
    T_DIMSE_C_StoreRQ& request = message->msg.CStoreRQ;
    DcmDataset* raw = nullptr;
    OFCondition cond = receiveSTORERequest(request, info.presentationContextID, raw);
    std::unique_ptr<DcmDataset> dataset(raw);
    if (cond.bad()) {
      // The peer went away mid-object: nothing reached the spool.
      ++context_.failed;
      spdlog::warn("listen: object from {} not received: {}", calling_ae_,
                   net::ConditionText(cond));
      return cond;
    }
    Uint16 status = StoreObject(*dataset, info.acceptedTransferSyntax);
    return sendSTOREResponse(info.presentationContextID, request, status);
  }

  void notifyAssociationRequest(const T_ASC_Parameters& params,
                                DcmSCPActionType& action) override {
    calling_ae_ = params.DULparams.callingAPTitle;
    DcmThreadSCP::notifyAssociationRequest(params, action);
  }

  OFBool checkCalledAETitleAccepted(const OFString& called_ae) override {
    return called_ae == context_.options.ae_title.c_str();
  }

  OFBool checkCallingAETitleAccepted(const OFString& calling_ae) override {
    const auto& allowed = context_.options.allowed_calling_aets;
    if (allowed.empty()) return OFTrue;
    return std::find(allowed.begin(), allowed.end(), std::string(calling_ae.c_str())) !=
           allowed.end();
  }

  void refuseAssociation(const DcmRefuseReasonType reason) override {
    ++context_.refused;
    spdlog::warn("listen: association from '{}' refused (reason {})", calling_ae_,
                 static_cast<int>(reason));
    DcmThreadSCP::refuseAssociation(reason);
  }

  void notifyAssociationAcknowledge() override {
    ++context_.accepted;
    spdlog::info("listen: association from '{}' accepted", calling_ae_);
  }

 private:
  Uint16 StoreObject(DcmDataset& dataset, const OFString& transfer_syntax) {
    E_TransferSyntax xfer = DcmXfer(transfer_syntax.c_str()).getXfer();
    Result<CommitResult> written = net::WriteToSpool(context_.spool, dataset, xfer);
    if (!written.ok()) {
      ++context_.failed;
      spdlog::error("listen: object from '{}': {}", calling_ae_, written.error().ToString());
      return written.error().kind == ErrorKind::kMalformed ? STATUS_STORE_Error_CannotUnderstand
                                                           : STATUS_STORE_Refused_OutOfResources;
    }
    LogCommit(*written);
    ++context_.received;
    // Queued even when it was already there: the consumer skips what the store has.
    context_.queue.Push(written->path);
    return STATUS_Success;
  }

  void LogCommit(const CommitResult& written) const {
    if (written.outcome == SpoolCommit::kAlreadyThere) {
      spdlog::info("listen: {} from '{}' already in the spool, identical copy dropped",
                   written.path.filename().string(), calling_ae_);
    } else if (written.outcome == SpoolCommit::kStoredAside) {
      spdlog::warn("listen: {} from '{}' reuses a SOP Instance UID with different content; "
                   "kept beside the first copy", written.path.filename().string(), calling_ae_);
    }
  }

  ServerContext& context_;
  std::string calling_ae_;
};

DcmSharedSCPConfig MakeScpConfig(const ListenOptions& options) {
  DcmSCPConfig config;
  config.setAETitle(options.ae_title.c_str());
  config.setACSETimeout(static_cast<Uint32>(options.acse_timeout_s));
  config.setDIMSETimeout(static_cast<Uint32>(options.dimse_timeout_s));
  config.setDIMSEBlockingMode(DIMSE_NONBLOCKING);
  config.setMaxReceivePDULength(options.max_pdu);
  config.setHostLookupEnabled(OFFalse);
  OFList<OFString> verification_syntaxes = net::UncompressedTransferSyntaxes();
  config.addPresentationContext(UID_VerificationSOPClass, verification_syntaxes);
  OFList<OFString> storage_syntaxes = net::AcceptedTransferSyntaxes();
  for (const std::string& sop_class : net::RadiographStorageClasses()) {
    config.addPresentationContext(sop_class.c_str(), storage_syntaxes);
  }
  return DcmSharedSCPConfig(config);
}

// One association being served. The socket is kept so that shutdown can wake a worker that
// waits on an idle peer.
struct Worker {
  std::thread thread;
  std::shared_ptr<std::atomic<bool>> finished = std::make_shared<std::atomic<bool>>(false);
  DcmNativeSocketType socket = -1;
};

// DCMTK keeps the socket accessor protected; a member pointer named through a derived class
// reads it without touching the connection object's state.
struct SocketAccess : DcmTransportConnection {
  static DcmNativeSocketType Of(DcmTransportConnection* conn) {
    DcmNativeSocketType (DcmTransportConnection::*get)() = &SocketAccess::getSocket;
    return (conn->*get)();
  }
};

void RejectBusy(T_ASC_Association* assoc) {
  T_ASC_RejectParameters reject = {ASC_RESULT_REJECTEDTRANSIENT,
                                   ASC_SOURCE_SERVICEPROVIDER_PRESENTATION_RELATED,
                                   ASC_REASON_SP_PRES_LOCALLIMITEXCEEDED};
  ASC_rejectAssociation(assoc, &reject);
  ASC_dropAssociation(assoc);
  ASC_destroyAssociation(&assoc);
}

void StartWorker(std::list<Worker>& workers, T_ASC_Association* assoc,
                 const DcmSharedSCPConfig& config, ServerContext& context) {
  Worker& worker = workers.emplace_back();
  if (DcmTransportConnection* conn = DUL_getTransportConnection(assoc->DULassociation)) {
    worker.socket = SocketAccess::Of(conn);
  }
  worker.thread = std::thread([assoc, config, &context, done = worker.finished] {
    ReceiverScp scp(context);
    scp.setSharedConfig(config);
    OFCondition cond = scp.run(assoc);  // negotiates, serves, drops and destroys
    if (cond.bad()) spdlog::debug("listen: association ended: {}", net::ConditionText(cond));
    *done = true;
  });
}

void ReapFinished(std::list<Worker>& workers) {
  for (auto it = workers.begin(); it != workers.end();) {
    if (*it->finished) {
      it->thread.join();
      it = workers.erase(it);
    } else {
      ++it;
    }
  }
}

// Waits for running associations; after `grace` the sockets of those still open are shut
// down, which ends their blocking reads (an object in flight is then not committed).
void StopWorkers(std::list<Worker>& workers, std::chrono::seconds grace) {
  auto deadline = std::chrono::steady_clock::now() + grace;
  while (!workers.empty() && std::chrono::steady_clock::now() < deadline) {
    ReapFinished(workers);
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  for (Worker& worker : workers) {
    if (!*worker.finished && worker.socket >= 0) {
      spdlog::warn("listen: aborting an association still open at shutdown");
      ::shutdown(worker.socket, SHUT_RDWR);
    }
  }
  for (Worker& worker : workers) worker.thread.join();
  workers.clear();
}

}  // namespace

Status ValidateListenOptions(const ListenOptions& options) {
  if (options.port == 0) {
    return MakeError(ErrorKind::kInvalidInput, "", "must be 1..65535", "--port");
  }
  if (!net::IsValidAeTitle(options.ae_title)) {
    return MakeError(ErrorKind::kInvalidInput, "", "AE title must be 1..16 characters, no '\\'",
                     "--aet");
  }
  for (const std::string& aet : options.allowed_calling_aets) {
    if (!net::IsValidAeTitle(aet)) {
      return MakeError(ErrorKind::kInvalidInput, "", "not a valid AE title: '" + aet + "'",
                       "--allow");
    }
  }
  if (options.max_associations < 1 || options.max_associations > 256) {
    return MakeError(ErrorKind::kInvalidInput, "", "must be 1..256", "--max-associations");
  }
  if (options.acse_timeout_s < 1 || options.dimse_timeout_s < 1) {
    return MakeError(ErrorKind::kInvalidInput, "", "timeouts must be at least 1 s", "timeout");
  }
  return Status::Ok();
}

Result<ListenSummary> RunStorageServer(const ListenOptions& options, const Spool& spool,
                                       const SpoolSink& sink, const std::atomic<bool>& stop,
                                       const std::function<void()>& ready) {
  if (Status valid = ValidateListenOptions(options); !valid.ok()) return valid.error();
  T_ASC_Network* network = nullptr;
  OFCondition cond =
      ASC_initializeNetwork(NET_ACCEPTOR, options.port, options.acse_timeout_s, &network);
  if (cond.bad()) {
    return MakeError(ErrorKind::kNetwork, "port " + std::to_string(options.port),
                     "cannot listen: " + net::ConditionText(cond));
  }
  ConsumerQueue queue(sink);
  // Objects received before a crash or kill and never recorded are measured first.
  for (const std::filesystem::path& file : spool.ReceivedFiles()) queue.Push(file);

  ServerContext context{options, spool, queue};
  DcmSharedSCPConfig config = MakeScpConfig(options);
  std::list<Worker> workers;
  if (ready) ready();
  spdlog::info("listen: AE '{}' listening on port {}", options.ae_title, options.port);

  while (!stop.load()) {
    T_ASC_Association* assoc = nullptr;
    // Non-blocking with a one-second wait, so that `stop` is seen promptly.
    cond = ASC_receiveAssociation(network, &assoc, options.max_pdu, nullptr, nullptr, OFFalse,
                                  DUL_NOBLOCK, 1);
    ReapFinished(workers);
    if (cond.bad()) {
      if (cond != DUL_NOASSOCIATIONREQUEST) {
        spdlog::warn("listen: incoming association failed: {}", net::ConditionText(cond));
      }
      if (assoc != nullptr) {
        ASC_dropAssociation(assoc);
        ASC_destroyAssociation(&assoc);
      }
      continue;
    }
    if (static_cast<int>(workers.size()) >= options.max_associations) {
      ++context.refused;
      spdlog::warn("listen: association refused: {} already open", workers.size());
      RejectBusy(assoc);
      continue;
    }
    StartWorker(workers, assoc, config, context);
  }

  spdlog::info("listen: stopping; waiting for {} open association(s)", workers.size());
  StopWorkers(workers, std::chrono::seconds(std::min(options.dimse_timeout_s, 10)));
  ASC_dropNetwork(&network);
  queue.Finish();

  ListenSummary summary;
  summary.associations_accepted = context.accepted;
  summary.associations_refused = context.refused;
  summary.objects_received = context.received;
  summary.objects_failed = context.failed;
  summary.objects_consumed = queue.consumed();
  summary.consume_failures = queue.failed();
  return summary;
}

}  // namespace beamtrim
