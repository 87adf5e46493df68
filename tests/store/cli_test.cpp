// End to end with the real program: synthetic files, `beamtrim scan` killed with SIGKILL
// mid-run, resumed, compared with an uninterrupted scan; then `beamtrim tables`.
// Needs the beamtrim program built (BEAMTRIM_BINARY); without it the case says so and stops.
#include <doctest/doctest.h>

#include <signal.h>
#include <sqlite3.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdlib>
#include <fstream>
#include <iterator>
#include <thread>

#include "store_fixtures.h"

using namespace beamtrim::testing;

namespace {

int Run(const std::string& command) {
  int status = std::system(command.c_str());
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

int64_t CountRows(const std::filesystem::path& store) {
  sqlite3* db = nullptr;
  int64_t n = -1;
  if (sqlite3_open_v2(store.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK) {
    sqlite3_busy_timeout(db, 1000);
    sqlite3_stmt* stmt = nullptr;
    if (sqlite3_prepare_v2(db, "SELECT count(*) FROM images", -1, &stmt, nullptr) == SQLITE_OK &&
        sqlite3_step(stmt) == SQLITE_ROW) {
      n = sqlite3_column_int64(stmt, 0);
    }
    sqlite3_finalize(stmt);
  }
  sqlite3_close(db);
  return n;
}

std::vector<std::string> Rows(const std::filesystem::path& store) {
  sqlite3* db = nullptr;
  sqlite3_open_v2(store.c_str(), &db, SQLITE_OPEN_READONLY, nullptr);
  sqlite3_stmt* stmt = nullptr;
  std::vector<std::string> rows;
  sqlite3_prepare_v2(db,
                     "SELECT file_path, file_size, sop_instance_uid, status, reason, "
                     "accession_hash, study_hash, operator, outcome, excess_fraction, record_json "
                     "FROM images ORDER BY file_path",
                     -1, &stmt, nullptr);
  while (sqlite3_step(stmt) == SQLITE_ROW) {
    std::string row;
    for (int c = 0; c < sqlite3_column_count(stmt); ++c) {
      const unsigned char* text = sqlite3_column_text(stmt, c);
      row += std::string(text ? reinterpret_cast<const char*>(text) : "NULL") + "|";
    }
    rows.push_back(row);
  }
  sqlite3_finalize(stmt);
  sqlite3_close(db);
  return rows;
}

std::string ReadAll(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

}  // namespace

TEST_CASE("ProgramKilledWithSigkillResumesToTheRowsOfAnUninterruptedScan") {
  const std::string binary = BEAMTRIM_BINARY;
  if (!std::filesystem::exists(binary)) {
    MESSAGE("beamtrim program not built (" << binary << "): build beamtrim_cli to run this case");
    return;
  }
  TempDir dir;
  const int kImages = 60;
  REQUIRE(Run("'" + binary + "' synth --out '" + (dir / "in").string() + "' --count " +
              std::to_string(kImages) + " --seed 11 --threads 1 > /dev/null 2>&1") == 0);
  std::string key = " --key-file '" + (dir / "store.key").string() + "'";
  std::string in = " '" + (dir / "in").string() + "'";
  int reference = Run("'" + binary + "' scan" + in + " --store '" + (dir / "ref.db").string() +
                      "'" + key + " --threads 1 > /dev/null 2>&1");
  REQUIRE(reference >= 0);
  REQUIRE(reference <= 1);  // 1: some synthetic files may fail to measure; they are recorded
  REQUIRE(CountRows(dir / "ref.db") == kImages);

  pid_t child = ::fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    std::freopen("/dev/null", "w", stderr);
    std::string store = (dir / "killed.db").string(), key_file = (dir / "store.key").string();
    std::string input = (dir / "in").string();
    ::execl(binary.c_str(), binary.c_str(), "scan", input.c_str(), "--store", store.c_str(),
            "--key-file", key_file.c_str(), "--threads", "1", static_cast<char*>(nullptr));
    ::_exit(127);
  }
  // Kill it once a few records are committed: everything stored so far must survive.
  auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(120);
  while (CountRows(dir / "killed.db") < 5 && std::chrono::steady_clock::now() < deadline) {
    std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  ::kill(child, SIGKILL);
  int status = 0;
  ::waitpid(child, &status, 0);
  REQUIRE(WIFSIGNALED(status));
  int64_t survived = CountRows(dir / "killed.db");
  CHECK(survived >= 5);
  CHECK(survived < kImages);

  int resumed = Run("'" + binary + "' scan" + in + " --store '" + (dir / "killed.db").string() +
                    "'" + key + " --threads 2 2> '" + (dir / "resume.txt").string() + "'");
  CHECK(resumed == reference);
  CHECK(ReadAll(dir / "resume.txt").find("already stored by an earlier run: " +
                                         std::to_string(survived)) != std::string::npos);
  CHECK(Rows(dir / "killed.db") == Rows(dir / "ref.db"));

  // The tables command reads the resumed store.
  CHECK(Run("'" + binary + "' tables --store '" + (dir / "killed.db").string() +
            "' --format csv --out '" + (dir / "csv").string() + "' 2>/dev/null") == 0);
  CHECK(std::filesystem::exists(dir / "csv" / "overall.csv"));
  CHECK(std::filesystem::exists(dir / "csv" / "trend.csv"));
  CHECK(Run("'" + binary + "' tables --store '" + (dir / "missing.db").string() +
            "' --format json --out '" + (dir / "t.json").string() + "' 2>/dev/null") == 1);
}
