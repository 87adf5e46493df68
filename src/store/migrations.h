// The store schema as an ordered list of migrations. Version N is reached by applying
// migrations 1..N in order, each in its own transaction together with PRAGMA user_version = N
// and a row in schema_version, so a store is never left between two versions.
// Add a new version by appending a migration; never edit a published one (docs/store.md).
#pragma once

#include <string>
#include <vector>

#include "beamtrim/status.h"
#include "store/sqlite_db.h"

namespace beamtrim::store_internal {

struct Migration {
  int version;
  const char* description;
  const char* sql;
};

const std::vector<Migration>& Migrations();

// Reads PRAGMA user_version (0 for a new, empty file).
Result<int> ReadSchemaVersion(Database& db);

// Applies the migrations after the current version up to `target`. Refuses stores newer than
// this program knows.
Status MigrateTo(Database& db, int target);

}  // namespace beamtrim::store_internal
