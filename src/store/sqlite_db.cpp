// SQLite wrappers: every failure becomes an Error naming the store file and the reason.
#include "store/sqlite_db.h"

#include <chrono>
#include <ctime>
#include <utility>

namespace beamtrim::store_internal {

std::string NowUtc() {
  std::time_t now = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm tm{};
  gmtime_r(&now, &tm);
  char text[32];
  std::strftime(text, sizeof text, "%Y-%m-%dT%H:%M:%SZ", &tm);
  return text;
}

std::string SqliteReason(sqlite3* db, int code) {
  int primary = code & 0xff;
  if (primary == SQLITE_FULL) {
    return "the store is full (SQLITE_FULL): the disk or the size limit is reached; records "
           "already stored are kept, free space and run again to resume";
  }
  if (primary == SQLITE_BUSY || primary == SQLITE_LOCKED) {
    return "the store is locked by another program (SQLITE_BUSY)";
  }
  std::string text = db ? sqlite3_errmsg(db) : sqlite3_errstr(code);
  return "SQLite error " + std::to_string(code) + ": " + text;
}

Statement& Statement::operator=(Statement&& other) noexcept {
  if (this != &other) {
    if (stmt_) sqlite3_finalize(stmt_);
    db_ = std::exchange(other.db_, nullptr);
    stmt_ = std::exchange(other.stmt_, nullptr);
  }
  return *this;
}

Statement::~Statement() {
  if (stmt_) sqlite3_finalize(stmt_);
}

Statement& Statement::Bind(int index, const std::string& text) {
  sqlite3_bind_text(stmt_, index, text.data(), static_cast<int>(text.size()), SQLITE_TRANSIENT);
  return *this;
}

Statement& Statement::Bind(int index, int64_t value) {
  sqlite3_bind_int64(stmt_, index, value);
  return *this;
}

Statement& Statement::Bind(int index, std::optional<double> value) {
  if (value) {
    sqlite3_bind_double(stmt_, index, *value);
  } else {
    sqlite3_bind_null(stmt_, index);
  }
  return *this;
}

Statement& Statement::BindNull(int index) {
  sqlite3_bind_null(stmt_, index);
  return *this;
}

int Statement::Step() { return sqlite3_step(stmt_); }

void Statement::Reset() {
  sqlite3_reset(stmt_);
  sqlite3_clear_bindings(stmt_);
}

std::string Statement::Text(int column) const {
  const unsigned char* text = sqlite3_column_text(stmt_, column);
  if (!text) return {};
  return std::string(reinterpret_cast<const char*>(text),
                     static_cast<size_t>(sqlite3_column_bytes(stmt_, column)));
}

int64_t Statement::Int(int column) const { return sqlite3_column_int64(stmt_, column); }

std::optional<double> Statement::Real(int column) const {
  if (IsNull(column)) return std::nullopt;
  return sqlite3_column_double(stmt_, column);
}

bool Statement::IsNull(int column) const {
  return sqlite3_column_type(stmt_, column) == SQLITE_NULL;
}

Database::~Database() {
  if (db_) sqlite3_close_v2(db_);
}

Status Database::Open(const std::string& file, int flags) {
  file_ = file;
  int code = sqlite3_open_v2(file.c_str(), &db_, flags, nullptr);
  if (code != SQLITE_OK) {
    Error error = MakeStoreError(code, "cannot open the store");
    sqlite3_close_v2(db_);
    db_ = nullptr;
    return error;
  }
  sqlite3_extended_result_codes(db_, 1);
  return Status::Ok();
}

Status Database::Exec(const std::string& sql) {
  char* message = nullptr;
  int code = sqlite3_exec(db_, sql.c_str(), nullptr, nullptr, &message);
  if (message) sqlite3_free(message);
  if (code != SQLITE_OK) return MakeStoreError(code, "statement failed");
  return Status::Ok();
}

Result<Statement> Database::Prepare(const std::string& sql) {
  sqlite3_stmt* stmt = nullptr;
  int code = sqlite3_prepare_v2(db_, sql.c_str(), static_cast<int>(sql.size()), &stmt, nullptr);
  if (code != SQLITE_OK) return MakeStoreError(code, "cannot prepare a statement");
  return Statement(db_, stmt);
}

Error Database::MakeStoreError(int code, const std::string& what) const {
  return MakeError(ErrorKind::kStore, file_, what + ": " + SqliteReason(db_, code));
}

Result<Statement*> StatementCache::Get(const std::string& sql) {
  auto it = statements_.find(sql);
  if (it == statements_.end()) {
    auto prepared = db_.Prepare(sql);
    if (!prepared) return prepared.error();
    it = statements_.emplace(sql, std::move(*prepared)).first;
  }
  it->second.Reset();
  return &it->second;
}

Transaction::~Transaction() {
  if (open_) (void)db_.Exec("ROLLBACK");
}

Status Transaction::Begin() {
  // IMMEDIATE takes the write lock up front, so a busy store fails here, not half-way.
  Status status = db_.Exec("BEGIN IMMEDIATE");
  open_ = status.ok();
  return status;
}

Status Transaction::Commit() {
  Status status = db_.Exec("COMMIT");
  if (status.ok()) open_ = false;
  return status;
}

}  // namespace beamtrim::store_internal
