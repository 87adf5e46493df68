// End-to-end tests of `beamtrim pull` against DCMTK's dcmqrscp as the archive, on 127.0.0.1.
#include <doctest/doctest.h>

#include <dcmtk/config/osconfig.h>
#include <dcmtk/dcmdata/dcdeftag.h>
#include <dcmtk/dcmdata/dcfilefo.h>

#include "beamtrim/network.h"
#include "beamtrim/store.h"
#include "net/net_test_util.h"

namespace beamtrim {
namespace {

using namespace nettest;

// Synthetic archive content (synthetic ground truth): study date decides what a pull fetches.
struct ArchiveFixture {
  TempDir dir;
  int port = FreePort();
  int move_port = FreePort();
  fs::path db = dir.path() / "db";
  fs::path store = dir.path() / "audit.sqlite";
  std::vector<SynthImage> images;
  std::unique_ptr<Child> archive;

  ArchiveFixture() {
    fs::create_directories(db);
    Add("2.25.8101", "2.25.8100", "20240105", TransferSyntax::kExplicitLittle, "DX");
    Add("2.25.8102", "2.25.8100", "20240105", TransferSyntax::kExplicitLittle, "DX");
    Add("2.25.8201", "2.25.8200", "20240115", TransferSyntax::kImplicitLittle, "CR");
    Add("2.25.8301", "2.25.8300", "20240131", TransferSyntax::kExplicitBig, "DX");
    Add("2.25.8401", "2.25.8400", "20231231", TransferSyntax::kExplicitLittle, "DX");
    Add("2.25.8501", "2.25.8500", "20240201", TransferSyntax::kExplicitLittle, "DX");
    std::vector<std::string> index = {"dcmqridx", db.string()};
    for (const SynthImage& s : images) index.push_back(s.file.string());
    REQUIRE(Run(index, dir.path() / "dcmqridx.log") == 0);

    archive = StartServer(port, [&](int p) {
      // dcmqrscp configuration (DCMTK dcmqrcnf format): one storage area, and the C-MOVE
      // destination mapped to our own receiving port.
      std::ofstream cfg(dir.path() / "dcmqrscp.cfg");
      cfg << "NetworkTCPPort = " << p << "\nMaxPDUSize = 16384\nMaxAssociations = 4\n"
          << "HostTable BEGIN\nbeamtrim_dest = (BTMOVE, 127.0.0.1, " << move_port << ")\n"
          << "HostTable END\nVendorTable BEGIN\nVendorTable END\n"
          << "AETable BEGIN\nARCHIVE " << db.string() << " RW (100, 256mb) ANY\nAETable END\n";
      cfg.close();
      return std::make_unique<Child>(
          std::vector<std::string>{"dcmqrscp", "-v", "-dhl", "-c",
                                   (dir.path() / "dcmqrscp.cfg").string(), std::to_string(p)},
          dir.path() / "dcmqrscp.log");
    });
    REQUIRE_MESSAGE(archive != nullptr, Log("dcmqrscp.log"));
  }

  void Add(const std::string& sop, const std::string& study, const std::string& date,
           TransferSyntax syntax, const std::string& modality) {
    images.push_back(WriteSynthImage(db / (sop + ".dcm"), sop, study, date, syntax, modality));
  }

  int Pull(const std::string& from, const std::string& to, std::vector<std::string> extra = {},
           const std::string& log = "pull.log") {
    std::vector<std::string> argv = {BEAMTRIM_BINARY, "pull", "--archive",
                                     "127.0.0.1:" + std::to_string(port) + ":ARCHIVE",
                                     "--aet", "BTPULL", "--from", from, "--to", to,
                                     "--store", store.string(),
                                     "--spool", (dir.path() / "spool").string()};
    argv.insert(argv.end(), extra.begin(), extra.end());
    return Run(argv, dir.path() / log);
  }

  std::string Log(const std::string& name) const {
    std::ifstream in(dir.path() / name);
    std::stringstream text;
    text << in.rdbuf();
    return text.str();
  }

  std::unique_ptr<Store> OpenStore() const {
    StoreOptions options;
    options.must_exist = true;
    Result<std::unique_ptr<Store>> opened = Store::Open(store, options);
    REQUIRE_MESSAGE(opened.ok(), (opened.ok() ? "" : opened.error().ToString()));
    return std::move(opened.value());
  }

  // The SOP instances recorded in the store, among those the archive holds.
  std::vector<std::string> Recorded() const {
    std::unique_ptr<Store> s = OpenStore();
    std::vector<std::string> found;
    for (const SynthImage& image : images) {
      Result<std::optional<std::string>> json = s->RecordJson(image.sop_instance_uid);
      if (json.ok() && json->has_value()) found.push_back(image.sop_instance_uid);
    }
    return found;
  }

  std::vector<std::string> Expected(const std::string& from, const std::string& to) const {
    std::vector<std::string> uids;
    for (const SynthImage& image : images) {
      if (image.study_date >= from && image.study_date <= to) uids.push_back(image.sop_instance_uid);
    }
    return uids;
  }
};

int64_t Rows(const StoreCounts& c) { return c.ok + c.skipped + c.error; }

size_t Occurrences(const std::string& text, const std::string& what) {
  size_t count = 0;
  for (size_t at = text.find(what); at != std::string::npos; at = text.find(what, at + 1)) {
    ++count;
  }
  return count;
}

// Study Root C-FIND with a date range (PS3.4 C.2.2.2.5, range matching "from-to" inclusive)
// then C-GET (PS3.4 C.4.3): exactly the studies dated inside the range are fetched.
TEST_CASE("PullWithCGetFetchesExactlyTheStudiesInRange") {
  ArchiveFixture f;
  REQUIRE_MESSAGE(f.Pull("2024-01-01", "2024-01-31") == 0, f.Log("pull.log"), f.archive->Log());
  CHECK(f.Recorded() == f.Expected("20240101", "20240131"));
  CHECK(Rows(f.OpenStore()->Counts()) == 4);
  CHECK(f.Log("pull.log").find("studies 3/3") != std::string::npos);
}

// An interrupted pull is a pull that stopped part-way: the narrower first run stands in for
// it. The second run completes the range, the third finds nothing to do; no row is doubled.
TEST_CASE("RepeatedPullCompletesWithoutDuplicates") {
  ArchiveFixture f;
  REQUIRE_MESSAGE(f.Pull("20240101", "20240110", {}, "pull1.log") == 0, f.Log("pull1.log"));
  CHECK(f.Recorded() == f.Expected("20240101", "20240110"));
  REQUIRE_MESSAGE(f.Pull("20240101", "20240131", {}, "pull2.log") == 0, f.Log("pull2.log"),
                  f.archive->Log());
  CHECK(f.Log("pull2.log").find("already stored 2") != std::string::npos);
  REQUIRE(f.Pull("20240101", "20240131", {}, "pull3.log") == 0);
  CHECK(f.Log("pull3.log").find("images received 0, already stored 4") != std::string::npos);
  StoreCounts counts = f.OpenStore()->Counts();
  CHECK(Rows(counts) == 4);
  CHECK(counts.duplicates == 0);
  CHECK(f.Recorded() == f.Expected("20240101", "20240131"));
}

// A series that is partly stored (the archive got another image of it after the last pull)
// is completed image by image: C-GET at IMAGE level with the SOP Instance UID as unique key
// (PS3.4 C.4.3.2 and C.6.2.1.2). The images already stored are not fetched again.
TEST_CASE("ImageAddedToAStoredSeriesIsFetchedAtImageLevel") {
  ArchiveFixture f;
  REQUIRE_MESSAGE(f.Pull("20240105", "20240105", {}, "pull1.log") == 0, f.Log("pull1.log"));
  f.Add("2.25.8103", "2.25.8100", "20240105", TransferSyntax::kExplicitLittle, "DX");
  REQUIRE(Run({"dcmqridx", f.db.string(), f.images.back().file.string()},
              f.dir.path() / "dcmqridx2.log") == 0);
  REQUIRE_MESSAGE(f.Pull("20240105", "20240105", {}, "pull2.log") == 0, f.Log("pull2.log"),
                  f.archive->Log());
  CHECK(f.Log("pull2.log").find("images received 1, already stored 2, failed 0") !=
        std::string::npos);
  // The archive's own log counts its C-STORE sub-operations: two for the first pull, one for
  // the second; nothing already stored was sent again.
  CHECK(Occurrences(f.archive->Log(), "Store SCU RQ") == 3);
  CHECK(f.Recorded() == f.Expected("20240105", "20240105"));
  StoreCounts counts = f.OpenStore()->Counts();
  CHECK(Rows(counts) == 3);
  CHECK(counts.duplicates == 0);
}

// An image that cannot be measured is recorded once as an error row (the batch rule) and is
// then as done as any other: a repeated pull does not fetch it again.
TEST_CASE("ImageRecordedAsAnErrorIsNotFetchedAgain") {
  ArchiveFixture f;
  f.Add("2.25.8103", "2.25.8100", "20240105", TransferSyntax::kExplicitLittle, "DX");
  const fs::path broken = f.images.back().file;
  {
    // Rows no longer matches the pixel data length (PS3.5 8.1.1), so measuring must fail.
    DcmFileFormat ff;
    REQUIRE(ff.loadFile(broken.c_str()).good());
    REQUIRE(ff.loadAllDataIntoMemory().good());  // saving over a lazily read file truncates it
    ff.getDataset()->putAndInsertUint16(DCM_Rows, 4000);
    REQUIRE(ff.saveFile(broken.c_str(), EXS_LittleEndianExplicit).good());
  }
  REQUIRE(Run({"dcmqridx", f.db.string(), broken.string()}, f.dir.path() / "dcmqridx2.log") == 0);
  REQUIRE_MESSAGE(f.Pull("20240105", "20240105", {}, "pull1.log") == 0, f.Log("pull1.log"));
  REQUIRE_MESSAGE(f.Pull("20240105", "20240105", {}, "pull2.log") == 0, f.Log("pull2.log"));
  CHECK(f.Log("pull2.log").find("images received 0, already stored 3, failed 0") !=
        std::string::npos);
  CHECK(Occurrences(f.archive->Log(), "Store SCU RQ") == 3);
  StoreCounts counts = f.OpenStore()->Counts();
  CHECK(counts.ok == 2);
  CHECK(counts.error == 1);
  CHECK(counts.duplicates == 0);
}

// A pull killed after an object reached the spool but before it was recorded: the next run
// records what is in the spool first and fetches only what is still missing.
TEST_CASE("ObjectsLeftInTheSpoolAreRecordedBeforeFetching") {
  ArchiveFixture f;
  const fs::path received = f.dir.path() / "spool" / "received";
  fs::create_directories(received);
  fs::copy_file(f.images[0].file, received / SpoolFileName(f.images[0].sop_instance_uid));
  REQUIRE_MESSAGE(f.Pull("20240105", "20240105") == 0, f.Log("pull.log"), f.archive->Log());
  CHECK(f.Log("pull.log").find("images received 1, already stored 1, failed 0") !=
        std::string::npos);
  CHECK(Occurrences(f.archive->Log(), "Store SCU RQ") == 1);
  CHECK(f.Recorded() == f.Expected("20240105", "20240105"));
  CHECK(Rows(f.OpenStore()->Counts()) == 2);
}

TEST_CASE("PullWithModalityFilterSkipsOtherModalities") {
  ArchiveFixture f;
  REQUIRE_MESSAGE(f.Pull("20240101", "20240131", {"--modality", "CR"}) == 0, f.Log("pull.log"));
  CHECK(f.Recorded() == std::vector<std::string>{"2.25.8201"});
}

// C-MOVE (PS3.4 C.4.2): the archive opens its own association to the destination AE, which
// `pull` serves with its Storage SCP on the given port.
TEST_CASE("PullWithCMoveReceivesThroughItsOwnListener") {
  ArchiveFixture f;
  REQUIRE_MESSAGE(f.Pull("20240101", "20240110",
                         {"--move-dest", "BTMOVE", "--port", std::to_string(f.move_port)}) == 0,
                  f.Log("pull.log"), f.archive->Log());
  CHECK(f.Recorded() == f.Expected("20240101", "20240110"));
}

TEST_CASE("PullFromAClosedPortFailsWithANamedError") {
  TempDir dir;
  int port = FreePort();
  int code = Run({BEAMTRIM_BINARY, "pull", "--archive", "127.0.0.1:" + std::to_string(port) +
                  ":NOBODY", "--aet", "BTPULL", "--from", "20240101", "--to", "20240131",
                  "--store", (dir.path() / "s.sqlite").string()},
                 dir.path() / "pull.log");
  CHECK(code == 1);
  std::ifstream in(dir.path() / "pull.log");
  std::string log((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  CHECK(log.find("NOBODY@127.0.0.1") != std::string::npos);
}

TEST_CASE("PullPortWithoutMoveDestinationIsAUsageError") {
  TempDir dir;
  CHECK(Run({BEAMTRIM_BINARY, "pull", "--archive", "127.0.0.1:104:ARCHIVE", "--aet", "BTPULL",
             "--from", "2024-01-01", "--to", "2024-01-31", "--port", "11113", "--store",
             (dir.path() / "s.sqlite").string()},
            dir.path() / "log") == 2);
}

TEST_CASE("PullRejectsAnImpossibleDate") {
  TempDir dir;
  CHECK(Run({BEAMTRIM_BINARY, "pull", "--archive", "127.0.0.1:104:ARCHIVE", "--aet", "BTPULL",
             "--from", "2023-02-29", "--to", "2023-03-01", "--store",
             (dir.path() / "s.sqlite").string()},
            dir.path() / "log") == 2);
}

}  // namespace
}  // namespace beamtrim
