// The spool folder and its atomic writes.
#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cstdio>
#include <system_error>

#include <dcmtk/dcmdata/dcdeftag.h>
#include <dcmtk/dcmdata/dcfilefo.h>
#include <dcmtk/dcmdata/dcuid.h>
#include <spdlog/spdlog.h>

#include "net/net_internal.h"

namespace beamtrim {
namespace {

// Long enough for any valid UID (64 characters) plus the hash suffix, far below NAME_MAX.
constexpr size_t kMaxStemLength = 64;

// FNV-1a, 64 bit: not for security, only to keep distinct UIDs apart after sanitising.
uint64_t Fnv1a(std::string_view text) {
  uint64_t hash = 1469598103934665603ull;
  for (unsigned char c : text) {
    hash ^= c;
    hash *= 1099511628211ull;
  }
  return hash;
}

Status SyncPath(const std::filesystem::path& path, int flags) {
  int fd = ::open(path.c_str(), flags | O_CLOEXEC);
  if (fd < 0) {
    return MakeError(ErrorKind::kUnreadable, path.string(), "cannot open to flush to disk");
  }
  int rc = ::fsync(fd);
  ::close(fd);
  if (rc != 0) return MakeError(ErrorKind::kUnreadable, path.string(), "flush to disk failed");
  return Status::Ok();
}

}  // namespace

std::string SpoolFileName(std::string_view sop_instance_uid) {
  std::string stem;
  for (char c : sop_instance_uid) {
    if ((c >= '0' && c <= '9') || c == '.') stem.push_back(c);
  }
  // Leading/trailing dots would make names such as "." or "..", or hidden files.
  size_t first = stem.find_first_not_of('.');
  stem = first == std::string::npos ? std::string() : stem.substr(first);
  while (!stem.empty() && stem.back() == '.') stem.pop_back();
  if (stem.size() > kMaxStemLength) stem.resize(kMaxStemLength);
  while (!stem.empty() && stem.back() == '.') stem.pop_back();

  if (stem.empty() || stem != sop_instance_uid) {
    char suffix[24];
    std::snprintf(suffix, sizeof(suffix), "%016llx",
                  static_cast<unsigned long long>(Fnv1a(sop_instance_uid)));
    stem = (stem.empty() ? std::string("uid") : stem) + "-" + suffix;
  }
  return stem + ".dcm";
}

Result<Spool> Spool::Open(const std::filesystem::path& root) {
  std::error_code ec;
  for (const char* sub : {"tmp", "received"}) {
    std::filesystem::create_directories(root / sub, ec);
    if (ec) {
      return MakeError(ErrorKind::kUnreadable, (root / sub).string(),
                       "cannot create spool folder: " + ec.message());
    }
  }
  // Whatever is in tmp/ was being written when the program stopped: never a complete object.
  for (const auto& entry : std::filesystem::directory_iterator(root / "tmp", ec)) {
    std::error_code remove_ec;
    std::filesystem::remove(entry.path(), remove_ec);
    if (!remove_ec) spdlog::info("spool: removed partial file {}", entry.path().string());
  }
  return Spool(std::filesystem::absolute(root));
}

std::filesystem::path Spool::ReceivedPath(std::string_view sop_instance_uid) const {
  return received_dir() / SpoolFileName(sop_instance_uid);
}

std::filesystem::path Spool::TempPath(std::string_view sop_instance_uid) const {
  static std::atomic<uint64_t> counter{0};
  std::string name = SpoolFileName(sop_instance_uid) + "." + std::to_string(::getpid()) + "." +
                     std::to_string(counter.fetch_add(1)) + ".part";
  return tmp_dir() / name;
}

std::vector<std::filesystem::path> Spool::ReceivedFiles() const {
  std::vector<std::filesystem::path> files;
  std::error_code ec;
  for (const auto& entry : std::filesystem::directory_iterator(received_dir(), ec)) {
    if (entry.is_regular_file() && entry.path().extension() == ".dcm") {
      files.push_back(entry.path());
    }
  }
  std::sort(files.begin(), files.end());
  return files;
}

Status CommitSpoolFile(const std::filesystem::path& temp, const std::filesystem::path& target) {
  if (Status synced = SyncPath(temp, O_RDONLY); !synced.ok()) return synced;
  std::error_code ec;
  std::filesystem::rename(temp, target, ec);
  if (ec) {
    return MakeError(ErrorKind::kUnreadable, target.string(),
                     "cannot move received object into place: " + ec.message());
  }
  // The rename itself is durable only once the folder is flushed.
  return SyncPath(target.parent_path(), O_RDONLY | O_DIRECTORY);
}

RecoverySummary ConsumePending(const Spool& spool, const SpoolSink& sink) {
  RecoverySummary summary;
  for (const std::filesystem::path& file : spool.ReceivedFiles()) {
    if (sink.is_done && sink.is_done(file)) continue;
    Status status = sink.consume(file);
    if (status.ok()) {
      ++summary.consumed;
    } else {
      ++summary.failed;
      spdlog::error("{}", status.error().ToString());
    }
  }
  return summary;
}

namespace net {

std::string ConditionText(const OFCondition& condition) {
  return condition.text() ? condition.text() : "unknown DCMTK error";
}

bool IsValidAeTitle(const std::string& title) {
  if (title.empty() || title.size() > 16) return false;
  if (title.find_first_not_of(' ') == std::string::npos) return false;
  return std::all_of(title.begin(), title.end(), [](char c) {
    return c >= 0x20 && c < 0x7f && c != '\\';
  });
}

const std::vector<std::string>& RadiographStorageClasses() {
  static const std::vector<std::string> classes = {
      UID_DigitalXRayImageStorageForPresentation,
      UID_DigitalXRayImageStorageForProcessing,
      UID_ComputedRadiographyImageStorage,
  };
  return classes;
}

OFList<OFString> UncompressedTransferSyntaxes() {
  OFList<OFString> list;
  list.push_back(UID_LittleEndianExplicitTransferSyntax);
  list.push_back(UID_BigEndianExplicitTransferSyntax);
  list.push_back(UID_LittleEndianImplicitTransferSyntax);
  return list;
}

std::vector<std::string> CompressedTransferSyntaxes() {
  return {
      UID_DeflatedExplicitVRLittleEndianTransferSyntax,
      UID_RLELosslessTransferSyntax,
      UID_JPEGProcess14SV1TransferSyntax,
      UID_JPEGProcess14TransferSyntax,
      UID_JPEGLSLosslessTransferSyntax,
      UID_JPEG2000LosslessOnlyTransferSyntax,
      UID_JPEGProcess1TransferSyntax,
      UID_JPEGProcess2_4TransferSyntax,
      UID_JPEGLSLossyTransferSyntax,
      UID_JPEG2000TransferSyntax,
  };
}

OFList<OFString> AcceptedTransferSyntaxes() {
  OFList<OFString> list = UncompressedTransferSyntaxes();
  for (const std::string& uid : CompressedTransferSyntaxes()) list.push_back(uid.c_str());
  return list;
}

Result<std::filesystem::path> WriteToSpool(const Spool& spool, DcmDataset& dataset,
                                           E_TransferSyntax xfer) {
  OFString uid;
  if (dataset.findAndGetOFString(DCM_SOPInstanceUID, uid).bad() || uid.empty()) {
    return MakeError(ErrorKind::kMalformed, "received object", "missing",
                     "(0008,0018) SOP Instance UID");
  }
  const std::filesystem::path temp = spool.TempPath(uid.c_str());
  const std::filesystem::path target = spool.ReceivedPath(uid.c_str());
  // The file format object takes the data set over only for the write, then hands it back.
  DcmFileFormat file_format(&dataset, /*deepCopy=*/OFFalse);
  OFCondition cond = file_format.saveFile(temp.c_str(), xfer, EET_ExplicitLength,
                                          EGL_recalcGL, EPD_noChange, 0, 0, EWM_createNewMeta);
  file_format.getAndRemoveDataset();  // hand it back: the caller still owns `dataset`
  if (cond.bad()) {
    std::error_code ec;
    std::filesystem::remove(temp, ec);
    return MakeError(ErrorKind::kUnreadable, temp.string(),
                     "cannot write received object: " + ConditionText(cond));
  }
  if (Status committed = CommitSpoolFile(temp, target); !committed.ok()) {
    std::error_code ec;
    std::filesystem::remove(temp, ec);
    return committed.error();
  }
  return target;
}

}  // namespace net
}  // namespace beamtrim
