// Thin RAII wrappers over the SQLite C API for the store layer: a connection and a prepared
// statement. SQLite result codes become beamtrim Errors (kind kStore) naming the store file.
// Not thread-safe by themselves: the Store serialises access with its own lock.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <unordered_map>

#include <sqlite3.h>

#include "beamtrim/status.h"

namespace beamtrim::store_internal {

// Current time as ISO 8601 UTC (2026-12-02T05:14:33Z), for the *_utc columns.
std::string NowUtc();

// Plain-language reason for an SQLite failure; SQLITE_FULL gets a disk-full explanation.
std::string SqliteReason(sqlite3* db, int code);

class Statement {
 public:
  Statement() = default;
  Statement(sqlite3* db, sqlite3_stmt* stmt) : db_(db), stmt_(stmt) {}
  Statement(Statement&& other) noexcept { *this = std::move(other); }
  Statement& operator=(Statement&& other) noexcept;
  ~Statement();

  // Binding; index is 1-based as in SQLite.
  Statement& Bind(int index, const std::string& text);
  Statement& Bind(int index, int64_t value);
  Statement& Bind(int index, std::optional<double> value);  // NULL when empty
  Statement& BindNull(int index);

  // Returns SQLITE_ROW, SQLITE_DONE or an error code.
  int Step();
  void Reset();

  std::string Text(int column) const;
  int64_t Int(int column) const;
  std::optional<double> Real(int column) const;
  bool IsNull(int column) const;

 private:
  sqlite3* db_ = nullptr;
  sqlite3_stmt* stmt_ = nullptr;
};

class Database {
 public:
  Database() = default;
  ~Database();
  Database(const Database&) = delete;
  Database& operator=(const Database&) = delete;

  Status Open(const std::string& file, int flags);
  sqlite3* handle() const { return db_; }
  const std::string& file() const { return file_; }

  // Runs one or more statements without results.
  Status Exec(const std::string& sql);
  Result<Statement> Prepare(const std::string& sql);
  Error MakeStoreError(int code, const std::string& what) const;

 private:
  sqlite3* db_ = nullptr;
  std::string file_;
};

// Prepared statements kept for the life of a connection, so a batch of N records compiles each
// statement once instead of N times. Not thread-safe (the Store's lock covers it).
class StatementCache {
 public:
  explicit StatementCache(Database& db) : db_(db) {}
  // The statement for `sql`, prepared on first use; reset, with no bindings.
  Result<Statement*> Get(const std::string& sql);
  // Drops every statement (before the connection closes).
  void Clear() { statements_.clear(); }

 private:
  Database& db_;
  std::unordered_map<std::string, Statement> statements_;
};

// Resets a cached statement when the scope ends: a SELECT left mid-way would otherwise keep a
// read snapshot open, which holds back WAL checkpoints and hides later commits.
class ResetOnExit {
 public:
  explicit ResetOnExit(Statement* statement) : statement_(statement) {}
  ~ResetOnExit() { statement_->Reset(); }
  ResetOnExit(const ResetOnExit&) = delete;
  ResetOnExit& operator=(const ResetOnExit&) = delete;

 private:
  Statement* statement_;
};

// Commits on Commit(); rolls back when destroyed otherwise.
class Transaction {
 public:
  explicit Transaction(Database& db) : db_(db) {}
  ~Transaction();
  Status Begin();
  Status Commit();

 private:
  Database& db_;
  bool open_ = false;
};

}  // namespace beamtrim::store_internal
