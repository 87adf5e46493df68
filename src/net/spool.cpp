// The spool folder and its atomic writes.
#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <system_error>
#include <vector>

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

// Different objects kept under one SOP Instance UID: far more than any real resend pattern.
constexpr int kMaxVersions = 100;

void RemoveQuietly(const std::filesystem::path& path) {
  std::error_code ec;
  std::filesystem::remove(path, ec);
}

// "<stem>-vN.dcm": SpoolFileName never makes a 'v' after a '-', so this names no other UID.
std::filesystem::path VersionedName(const std::filesystem::path& target, int version) {
  return target.parent_path() /
         (target.stem().string() + "-v" + std::to_string(version) + target.extension().string());
}

// Gives `temp` the name `target` unless `target` exists. Returns 0 or an errno value
// (EEXIST when the name is taken). Both calls are atomic: the name appears complete or not at
// all, and an existing file is never touched.
int PlaceWithoutReplacing(const std::filesystem::path& temp, const std::filesystem::path& target) {
  if (::renameat2(AT_FDCWD, temp.c_str(), AT_FDCWD, target.c_str(), RENAME_NOREPLACE) == 0) {
    return 0;
  }
  if (errno != EINVAL && errno != ENOSYS) return errno;
  // File systems without RENAME_NOREPLACE: a hard link fails on an existing name, too.
  if (::link(temp.c_str(), target.c_str()) != 0) return errno;
  RemoveQuietly(temp);
  return 0;
}

bool SameBytes(const std::filesystem::path& a, const std::filesystem::path& b) {
  std::error_code ec_a, ec_b;
  if (std::filesystem::file_size(a, ec_a) != std::filesystem::file_size(b, ec_b) || ec_a || ec_b) {
    return false;
  }
  std::ifstream in_a(a, std::ios::binary), in_b(b, std::ios::binary);
  std::vector<char> buf_a(1 << 16), buf_b(1 << 16);
  while (in_a && in_b) {
    in_a.read(buf_a.data(), static_cast<std::streamsize>(buf_a.size()));
    in_b.read(buf_b.data(), static_cast<std::streamsize>(buf_b.size()));
    if (in_a.gcount() != in_b.gcount() ||
        !std::equal(buf_a.begin(), buf_a.begin() + in_a.gcount(), buf_b.begin())) {
      return false;
    }
  }
  return in_a.eof() && in_b.eof();
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

Result<CommitResult> CommitSpoolFile(const std::filesystem::path& temp,
                                     const std::filesystem::path& target) {
  if (Status synced = SyncPath(temp, O_RDONLY); !synced.ok()) return synced.error();
  CommitResult result{target, SpoolCommit::kStored};
  for (int version = 1; version <= kMaxVersions; ++version) {
    result.path = version == 1 ? target : VersionedName(target, version);
    int placed = PlaceWithoutReplacing(temp, result.path);
    if (placed == 0) break;
    if (placed != EEXIST) {
      return MakeError(ErrorKind::kUnreadable, target.string(),
                       std::string("cannot move received object into place: ") +
                           std::strerror(placed));
    }
    if (SameBytes(temp, result.path)) {
      RemoveQuietly(temp);
      result.outcome = SpoolCommit::kAlreadyThere;
      return result;
    }
    result.outcome = SpoolCommit::kStoredAside;
    if (version == kMaxVersions) {
      return MakeError(ErrorKind::kUnreadable, target.string(),
                       "too many different objects with this SOP Instance UID");
    }
  }
  // The new name is durable only once the folder is flushed.
  if (Status synced = SyncPath(target.parent_path(), O_RDONLY | O_DIRECTORY); !synced.ok()) {
    return synced.error();
  }
  return result;
}

RecoverySummary ConsumePending(const Spool& spool, const SpoolSink& sink) {
  RecoverySummary summary;
  for (const std::filesystem::path& file : spool.ReceivedFiles()) {
    if (sink.is_done && sink.is_done(file)) continue;
    Status status = net::ConsumeGuarded(sink, file);
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

Status ConsumeGuarded(const SpoolSink& sink, const std::filesystem::path& file) {
  try {
    return sink.consume(file);
  } catch (const std::exception& e) {
    return MakeError(ErrorKind::kInternal, file.string(),
                     std::string("measuring failed unexpectedly: ") + e.what());
  } catch (...) {
    return MakeError(ErrorKind::kInternal, file.string(), "measuring failed unexpectedly");
  }
}

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

Result<CommitResult> WriteToSpool(const Spool& spool, DcmDataset& dataset,
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
    RemoveQuietly(temp);
    return MakeError(ErrorKind::kUnreadable, temp.string(),
                     "cannot write received object: " + ConditionText(cond));
  }
  Result<CommitResult> committed = CommitSpoolFile(temp, target);
  if (!committed.ok()) RemoveQuietly(temp);
  return committed;
}

}  // namespace net
}  // namespace beamtrim
