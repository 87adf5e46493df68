// File identity, secret keys, pseudonyms and the columns extracted from a record.
#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <random>

#include "beamtrim/store.h"
#include "store/sha256.h"

namespace beamtrim {

Result<FileIdentity> StatFile(const std::filesystem::path& file) {
  struct stat info {};
  if (::stat(file.c_str(), &info) != 0) {
    return MakeError(errno == ENOENT ? ErrorKind::kNotFound : ErrorKind::kUnreadable,
                     file.string(), std::strerror(errno));
  }
  FileIdentity id;
  id.path = file.string();
  id.size = static_cast<int64_t>(info.st_size);
  id.mtime_ns = static_cast<int64_t>(info.st_mtim.tv_sec) * 1'000'000'000 + info.st_mtim.tv_nsec;
  return id;
}

namespace {

Result<std::array<uint8_t, 32>> ReadKey(const std::filesystem::path& key_file) {
  int fd = ::open(key_file.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return MakeError(ErrorKind::kUnreadable, key_file.string(), std::strerror(errno));
  struct stat info {};
  ::fstat(fd, &info);
  std::array<uint8_t, 32> key{};
  ssize_t got = ::read(fd, key.data(), key.size());
  ::close(fd);
  if ((info.st_mode & 077) != 0) {
    return MakeError(ErrorKind::kInvalidInput, key_file.string(),
                     "key file is readable by other users: restrict it with chmod 600");
  }
  if (got != static_cast<ssize_t>(key.size()) || info.st_size != 32) {
    return MakeError(ErrorKind::kInvalidInput, key_file.string(),
                     "not a beamtrim key file (expected exactly 32 bytes)");
  }
  return key;
}

Status WriteNewKey(const std::filesystem::path& key_file) {
  std::array<uint8_t, 32> key{};
  std::random_device random;  // the kernel's random source on Linux
  for (size_t i = 0; i < key.size(); i += 4) {
    uint32_t word = random();
    std::memcpy(key.data() + i, &word, 4);
  }
  // O_EXCL: two processes starting at once must not overwrite each other's key.
  int fd = ::open(key_file.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0600);
  if (fd < 0) {
    if (errno == EEXIST) return Status::Ok();
    return MakeError(ErrorKind::kUnreadable, key_file.string(),
                     std::string("cannot create the key file: ") + std::strerror(errno));
  }
  ::fchmod(fd, 0600);  // the umask may have removed bits, never added them; be explicit
  bool ok = ::write(fd, key.data(), key.size()) == static_cast<ssize_t>(key.size());
  ok = ::fsync(fd) == 0 && ok;
  ::close(fd);
  if (!ok) {
    ::unlink(key_file.c_str());
    return MakeError(ErrorKind::kUnreadable, key_file.string(), "cannot write the key file");
  }
  return Status::Ok();
}

}  // namespace

Result<std::array<uint8_t, 32>> LoadOrCreateKey(const std::filesystem::path& key_file) {
  std::error_code ec;
  if (!std::filesystem::exists(key_file, ec)) {
    if (Status s = WriteNewKey(key_file); !s) return s.error();
  }
  return ReadKey(key_file);
}

std::string StaffPseudonym(const std::array<uint8_t, 32>& key, const std::string& name) {
  if (name.empty()) return "STAFF-UNKNOWN";
  std::string_view key_view(reinterpret_cast<const char*>(key.data()), key.size());
  store_internal::Digest d = store_internal::HmacSha256(key_view, "staff:" + name);
  std::string hex = store_internal::ToHex(d.data(), 3);
  for (char& c : hex) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  return "STAFF-" + hex;
}

ExtractedColumns ExtractColumns(const ImageRecord& r) {
  ExtractedColumns x;
  if (r.verdict) {
    x.outcome = r.verdict->outcome;
    x.assessable = r.status == RecordStatus::kOk && x.outcome != "not assessable";
  }
  if (r.field) {
    x.all_borders_visible = true;
    for (const SideMeasurement& side : r.field->sides) x.all_borders_visible &= side.visible;
    x.blanked_or_cropped = r.field->blanked || r.field->cropped;
  }
  if (r.anatomy) x.anatomy_clipped = !r.anatomy->clipped_sides.empty();
  if (r.excess) {
    x.excess_fraction = r.excess->fraction_at_0mm;
    x.excess_area_mm2 = r.excess->area_mm2;
    x.excess_area_patient_mm2 = r.excess->area_patient_mm2;
  }
  if (r.dose) {
    x.kap_dgy_cm2 = r.dose->kap_dgy_cm2;
    x.avoidable_kap_dgy_cm2 = r.dose->avoidable_kap_dgy_cm2;
  }
  return x;
}

}  // namespace beamtrim
