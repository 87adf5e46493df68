// The Store's private state, shared by the files that implement it (store.cpp writes,
// store_read.cpp reads, store_qc.cpp keeps the QC records). Every member function expects the
// caller to hold `mutex`.
#pragma once

#include <array>
#include <filesystem>
#include <mutex>
#include <optional>
#include <string>
#include <vector>

#include "beamtrim/store.h"
#include "store/sqlite_db.h"

namespace beamtrim {

struct Store::Impl {
  std::filesystem::path file;
  store_internal::Database db;
  store_internal::StatementCache statements{db};  // after db: finalised before it closes
  mutable std::mutex mutex;
  int version = 0;
  std::optional<std::array<uint8_t, 32>> key;
  std::filesystem::path key_file;

  std::string Hash(const std::string& kind, const std::string& value) const;
  Result<PutOutcome> PutLocked(const MeasuredImage& image, const FileIdentity& id);
  Status RecordDuplicate(const FileIdentity& id, const std::string& sop, int64_t image_id,
                         const std::string& stored_path);
};

namespace store_internal {
// The scan's look-up of a path, run once per file (Store::Find).
inline constexpr const char* kFindImage =
    "SELECT file_size, file_mtime_ns, status FROM images WHERE file_path = ?";
inline constexpr const char* kFindNote =
    "SELECT file_size, file_mtime_ns, 'ok' FROM duplicates WHERE file_path = ?";

// The SQL of every statement run per record (writes and the scan's look-ups), so a test can ask
// SQLite's planner that none of them scans a whole table.
std::vector<std::string> PerRecordQueries();
}  // namespace store_internal

}  // namespace beamtrim
