// End-to-end tests of `beamtrim listen` against DCMTK's storescu/echoscu on 127.0.0.1.
#include <doctest/doctest.h>

#include <dcmtk/config/osconfig.h>
#include <dcmtk/dcmdata/dcdeftag.h>
#include <dcmtk/dcmdata/dcfilefo.h>
#include <dcmtk/dcmdata/dcmetinf.h>

#include "beamtrim/network.h"
#include "beamtrim/store.h"
#include "net/net_test_util.h"

namespace beamtrim {
namespace {

using namespace nettest;

struct ListenFixture {
  TempDir dir;
  int port = FreePort();
  fs::path store = dir.path() / "audit.sqlite";
  fs::path spool = dir.path() / "spool";
  fs::path images = dir.path() / "images";

  std::unique_ptr<Child> Start(std::vector<std::string> extra = {}) {
    auto child = StartServer(port, [&](int p) {
      std::vector<std::string> argv = {BEAMTRIM_BINARY, "listen", "--port", std::to_string(p),
                                       "--aet", "BEAMTRIM", "--store", store.string(),
                                       "--spool", spool.string()};
      argv.insert(argv.end(), extra.begin(), extra.end());
      return std::make_unique<Child>(argv, dir.path() / "listen.log");
    });
    REQUIRE_MESSAGE(child != nullptr, ("listen did not open its port: " + Log("listen.log")));
    return child;
  }

  int StoreScu(const std::string& calling, const std::vector<fs::path>& files,
               const std::string& log_name = "storescu.log",
               const std::vector<std::string>& options = {}) {
    std::vector<std::string> argv = {"storescu"};
    argv.insert(argv.end(), options.begin(), options.end());
    for (std::string a : {std::string("-aet"), calling, std::string("-aec"),
                          std::string("BEAMTRIM"), std::string("127.0.0.1"),
                          std::to_string(port)}) {
      argv.push_back(a);
    }
    for (const fs::path& f : files) argv.push_back(f.string());
    return Run(argv, dir.path() / log_name);
  }

  std::string Log(const std::string& name) const {
    std::ifstream in(dir.path() / name);
    std::stringstream text;
    text << in.rdbuf();
    return text.str();
  }

  StoreCounts Counts() const {
    StoreOptions options;
    options.must_exist = true;
    Result<std::unique_ptr<Store>> opened = Store::Open(store, options);
    REQUIRE_MESSAGE(opened.ok(), (opened.ok() ? "" : opened.error().ToString()));
    return (*opened)->Counts();
  }

  bool Recorded(const std::string& sop_uid) const {
    StoreOptions options;
    options.must_exist = true;
    Result<std::unique_ptr<Store>> opened = Store::Open(store, options);
    REQUIRE(opened.ok());
    Result<std::optional<std::string>> json = (*opened)->RecordJson(sop_uid);
    return json.ok() && json->has_value();
  }

  size_t SpoolCount() const {
    size_t n = 0;
    for (const auto& e : fs::directory_iterator(spool / "received")) n += e.is_regular_file();
    return n;
  }
};

int64_t Rows(const StoreCounts& c) { return c.ok + c.skipped + c.error; }

std::string FileTransferSyntax(const fs::path& file) {
  DcmFileFormat ff;
  if (ff.loadFile(file.c_str()).bad()) return {};
  OFString uid;
  ff.getMetaInfo()->findAndGetOFString(DCM_TransferSyntaxUID, uid);
  return uid.c_str();
}

// storescu option that proposes `syntax` as the preferred transfer syntax, in a presentation
// context of its own (storescu manual, "proposed transmission transfer syntaxes"; without +C
// the uncompressed fall-backs go in a separate context). storescu never proposes a file's
// compressed syntax unless told, and then tries, and fails, to decompress it.
std::string StorescuProposal(TransferSyntax syntax) {
  switch (syntax) {
    case TransferSyntax::kImplicitLittle: return "-xi";
    case TransferSyntax::kExplicitLittle: return "-xe";
    case TransferSyntax::kExplicitBig: return "-xb";
    case TransferSyntax::kDeflated: return "-xd";
    case TransferSyntax::kRle: return "-xr";
    case TransferSyntax::kJpegBaseline: return "-xy";
    case TransferSyntax::kJpegExtended: return "-xx";
    case TransferSyntax::kJpegLossless: return "-xs";
    case TransferSyntax::kJpegLsLossless: return "-xt";
    case TransferSyntax::kJpegLsNearLossless: return "-xu";
    case TransferSyntax::kJpeg2000Lossless: return "-xv";
    case TransferSyntax::kJpeg2000: return "-xw";
  }
  return "-x=";
}

// Every transfer syntax the writer offers (PS3.5 section 10 and Annex A lists them); each
// object must arrive once, in the syntax it was sent in (no transcoding), and be recorded.
// Each file goes in its own storescu association that proposes the file's own syntax first
// (-R: only the SOP classes of the files): storescu sends as is when that context is
// accepted, so the syntax found in the spool shows beamtrim accepted it and kept it.
TEST_CASE("StorescuFolderIsReceivedOnceEachAndRecorded") {
  ListenFixture f;
  fs::create_directories(f.images);
  std::vector<SynthImage> sent;
  int i = 0;
  for (TransferSyntax syntax : AllTransferSyntaxes()) {
    ++i;
    sent.push_back(WriteSynthImage(f.images / ("img" + std::to_string(i) + ".dcm"),
                                   "2.25.1001" + std::to_string(i), "2.25.2001", "20240110",
                                   syntax, i % 2 ? "DX" : "CR"));
  }
  auto listen = f.Start({"--allow", "MODALITY1", "--allow", "MODALITY2"});
  // C-ECHO (PS3.7 9.1.5) first: verification must be accepted.
  CHECK(Run({"echoscu", "-aet", "MODALITY1", "-aec", "BEAMTRIM", "127.0.0.1",
             std::to_string(f.port)},
            f.dir.path() / "echo.log") == 0);
  for (const SynthImage& s : sent) {
    const std::string syntax_name = TransferSyntaxName(s.syntax);
    CAPTURE(syntax_name);
    const std::string log = "storescu-" + s.file.stem().string() + ".log";
    CHECK_MESSAGE(f.StoreScu("MODALITY1", {s.file}, log, {"-R", StorescuProposal(s.syntax)}) == 0,
                  f.Log(log));
  }
  // The same objects again from the other modality: no new rows, no new spool files.
  for (const SynthImage& s : sent) {
    const std::string log = "storescu2-" + s.file.stem().string() + ".log";
    CHECK_MESSAGE(f.StoreScu("MODALITY2", {s.file}, log, {"-R", StorescuProposal(s.syntax)}) == 0,
                  f.Log(log));
  }
  CHECK_MESSAGE(listen->Stop(SIGTERM) == 0, listen->Log());

  CHECK(f.SpoolCount() == sent.size());
  StoreCounts counts = f.Counts();
  CHECK(Rows(counts) == static_cast<int64_t>(sent.size()));
  CHECK(counts.duplicates == 0);
  for (const SynthImage& s : sent) {
    const std::string syntax_name = TransferSyntaxName(s.syntax);
    CAPTURE(syntax_name);
    CHECK(f.Recorded(s.sop_instance_uid));
    fs::path received = f.spool / "received" / SpoolFileName(s.sop_instance_uid);
    CHECK(FileTransferSyntax(received) == TransferSyntaxUid(s.syntax));
  }
}

// PS3.8 9.3.4: an unknown calling AE title gets A-ASSOCIATE-RJ, "calling AE title not
// recognized" (result 1 rejected-permanent, source 1 service-user, reason 3).
TEST_CASE("UnknownCallingAeTitleIsRefused") {
  ListenFixture f;
  fs::create_directories(f.images);
  SynthImage s = WriteSynthImage(f.images / "a.dcm", "2.25.3001", "2.25.3002", "20240110");
  auto listen = f.Start({"--allow", "MODALITY1"});
  CHECK(f.StoreScu("INTRUDER", {s.file}) != 0);
  std::string log = f.Log("storescu.log");
  CHECK_MESSAGE(log.find("Calling AE Title Not Recognized") != std::string::npos, log);
  CHECK(listen->Stop(SIGTERM) == 0);
  CHECK(f.SpoolCount() == 0);
  CHECK(Rows(f.Counts()) == 0);
}

TEST_CASE("WrongCalledAeTitleIsRefused") {
  ListenFixture f;
  fs::create_directories(f.images);
  SynthImage s = WriteSynthImage(f.images / "a.dcm", "2.25.3101", "2.25.3102", "20240110");
  auto listen = f.Start();
  CHECK(Run({"storescu", "-aet", "MODALITY1", "-aec", "SOMEONEELSE", "127.0.0.1",
             std::to_string(f.port), s.file.string()},
            f.dir.path() / "storescu.log") != 0);
  CHECK(f.Log("storescu.log").find("Called AE Title Not Recognized") != std::string::npos);
  CHECK(listen->Stop(SIGTERM) == 0);
  CHECK(f.SpoolCount() == 0);
}

// A data set whose SOP Instance UID tries to climb out of the spool lands inside it.
TEST_CASE("TraversalSopInstanceUidCannotWriteOutsideTheSpool") {
  ListenFixture f;
  fs::create_directories(f.images);
  fs::path file = f.images / "evil.dcm";
  WriteSynthImage(file, "2.25.4001", "2.25.4002", "20240110");
  {
    DcmFileFormat ff;
    REQUIRE(ff.loadFile(file.c_str()).good());
    // Large values are read lazily from the file; saving over it would truncate them.
    REQUIRE(ff.loadAllDataIntoMemory().good());
    const char* evil = "../../../../escaped";
    ff.getDataset()->putAndInsertString(DCM_SOPInstanceUID, evil);
    ff.getMetaInfo()->putAndInsertString(DCM_MediaStorageSOPInstanceUID, evil);
    REQUIRE(ff.saveFile(file.c_str(), EXS_LittleEndianExplicit).good());
  }
  auto listen = f.Start();
  f.StoreScu("MODALITY1", {file});  // storescu may itself refuse the invalid UID
  CHECK(listen->Stop(SIGTERM) == 0);
  for (const auto& e : fs::recursive_directory_iterator(f.dir.path())) {
    CHECK(e.path().filename().string().find("escaped") == std::string::npos);
  }
  // Whatever arrived is inside received/, under a sanitised name.
  for (const auto& e : fs::directory_iterator(f.spool / "received")) {
    CHECK(e.path().filename().string().find("..") == std::string::npos);
  }
}

// PS3.8 9.3: hand-built PDUs, so the client can stop in the middle of a data set.
std::string Be16(int v) { return {char((v >> 8) & 0xff), char(v & 0xff)}; }
std::string Be32(uint32_t v) { return Be16(int(v >> 16)) + Be16(int(v & 0xffff)); }
std::string Le16(int v) { return {char(v & 0xff), char((v >> 8) & 0xff)}; }
std::string Le32(uint32_t v) { return Le16(int(v & 0xffff)) + Le16(int(v >> 16)); }
std::string Padded(std::string s, size_t n) {
  s.resize(n, ' ');
  return s;
}
std::string Item(int type, const std::string& body) {
  return std::string(1, char(type)) + '\0' + Be16(int(body.size())) + body;
}
std::string EvenUid(std::string uid) {
  if (uid.size() % 2) uid.push_back('\0');
  return uid;
}
// Implicit VR little endian element (PS3.5 7.1.3).
std::string Element(int group, int elem, const std::string& value) {
  return Le16(group) + Le16(elem) + Le32(uint32_t(value.size())) + value;
}

std::string AssociateRq(const std::string& called, const std::string& calling) {
  std::string pc = std::string(1, char(1)) + std::string(3, '\0') +
                   Item(0x30, "1.2.840.10008.5.1.4.1.1.1.1") + Item(0x40, "1.2.840.10008.1.2");
  std::string user = Item(0x51, Be32(16384)) + Item(0x52, "2.25.5551212");
  std::string body = Be16(1) + std::string(2, '\0') + Padded(called, 16) + Padded(calling, 16) +
                     std::string(32, '\0') + Item(0x10, "1.2.840.10008.3.1.1.1") +
                     Item(0x20, pc) + Item(0x50, user);
  return std::string(1, char(0x01)) + '\0' + Be32(uint32_t(body.size())) + body;
}

std::string PData(int control, const std::string& data) {
  std::string pdv = Be32(uint32_t(data.size() + 2)) + char(1) + char(control) + data;
  return std::string(1, char(0x04)) + '\0' + Be32(uint32_t(pdv.size())) + pdv;
}

bool SendAll(int fd, const std::string& bytes) {
  return ::send(fd, bytes.data(), bytes.size(), MSG_NOSIGNAL) == ssize_t(bytes.size());
}

TEST_CASE("AssociationDroppedMidObjectLeavesNothingHalfWritten") {
  ListenFixture f;
  auto listen = f.Start();
  int fd = ConnectLoopback(f.port);
  REQUIRE(fd >= 0);
  REQUIRE(SendAll(fd, AssociateRq("BEAMTRIM", "MODALITY1")));
  char header[6] = {};
  REQUIRE(::recv(fd, header, sizeof(header), MSG_WAITALL) == 6);
  CHECK(header[0] == 0x02);  // A-ASSOCIATE-AC
  uint32_t rest = (uint8_t(header[2]) << 24) | (uint8_t(header[3]) << 16) |
                  (uint8_t(header[4]) << 8) | uint8_t(header[5]);
  std::string skip(rest, '\0');
  REQUIRE(::recv(fd, skip.data(), rest, MSG_WAITALL) == ssize_t(rest));
  // C-STORE-RQ command (PS3.7 9.3.1.1), then the first part of a data set, then hang up.
  std::string cmd = Element(0, 0x0002, EvenUid("1.2.840.10008.5.1.4.1.1.1.1")) +
                    Element(0, 0x0100, Le16(0x0001)) + Element(0, 0x0110, Le16(7)) +
                    Element(0, 0x0700, Le16(0)) + Element(0, 0x0800, Le16(0x0001)) +
                    Element(0, 0x1000, EvenUid("2.25.6001"));
  cmd = Element(0, 0x0000, Le32(uint32_t(cmd.size()))) + cmd;
  REQUIRE(SendAll(fd, PData(0x03, cmd)));
  std::string partial = Element(0x0008, 0x0016, EvenUid("1.2.840.10008.5.1.4.1.1.1.1")) +
                        Element(0x0008, 0x0018, EvenUid("2.25.6001"));
  REQUIRE(SendAll(fd, PData(0x00, partial)));  // not the last fragment
  ::close(fd);

  // The server stays up and still serves a complete object afterwards.
  fs::create_directories(f.images);
  SynthImage s = WriteSynthImage(f.images / "b.dcm", "2.25.6002", "2.25.6003", "20240110");
  CHECK(f.StoreScu("MODALITY1", {s.file}) == 0);
  CHECK(listen->Stop(SIGTERM) == 0);
  CHECK(!f.Recorded("2.25.6001"));
  CHECK(f.Recorded("2.25.6002"));
  CHECK(Rows(f.Counts()) == 1);
  CHECK(f.SpoolCount() == 1);
  CHECK(fs::is_empty(f.spool / "tmp"));
}

// Network input stays in its lane: bytes that are no DICOM at all, and an object whose pixel
// data cannot be measured, neither stop the listener nor the objects after them. The broken
// object is kept and recorded as an error row (the batch rule: a named error, never a stop).
TEST_CASE("BadInputNeverStopsTheListener") {
  ListenFixture f;
  fs::create_directories(f.images);
  fs::path broken = f.images / "broken.dcm";
  WriteSynthImage(broken, "2.25.6101", "2.25.6100", "20240110");
  {
    // Rows no longer matches the pixel data length (PS3.5 8.1.1: the length follows from
    // Rows x Columns x Bits Allocated), so the reader must refuse the pixels.
    DcmFileFormat ff;
    REQUIRE(ff.loadFile(broken.c_str()).good());
    // Large values are read lazily from the file; saving over it would truncate them.
    REQUIRE(ff.loadAllDataIntoMemory().good());
    ff.getDataset()->putAndInsertUint16(DCM_Rows, 4000);
    REQUIRE(ff.saveFile(broken.c_str(), EXS_LittleEndianExplicit).good());
  }
  SynthImage good = WriteSynthImage(f.images / "good.dcm", "2.25.6102", "2.25.6100", "20240110");
  auto listen = f.Start();

  int fd = ConnectLoopback(f.port);
  REQUIRE(fd >= 0);
  CHECK(SendAll(fd, std::string("GET / HTTP/1.0\r\n\r\n") + std::string(64, '\xff')));
  ::close(fd);
  CHECK(f.StoreScu("MODALITY1", {broken}, "storescu-broken.log") == 0);
  CHECK(f.StoreScu("MODALITY1", {good.file}, "storescu-good.log") == 0);
  CHECK_MESSAGE(listen->Stop(SIGTERM) == 0, listen->Log());

  CHECK(f.SpoolCount() == 2);
  StoreCounts counts = f.Counts();
  CHECK(counts.ok == 1);
  CHECK(counts.error == 1);
  CHECK(f.Recorded("2.25.6102"));
}

// A different object under a SOP Instance UID already received (PS3.3 C.12.1.1.1 says a UID
// names one object, but senders do reuse them): the first copy stays untouched, the second is
// kept beside it, and the store notes a duplicate instead of a second row.
TEST_CASE("DifferentObjectWithAReceivedUidIsKeptBesideTheFirst") {
  ListenFixture f;
  fs::create_directories(f.images);
  SynthImage first = WriteSynthImage(f.images / "first.dcm", "2.25.6301", "2.25.6300", "20240110");
  fs::path second = f.images / "second.dcm";
  WriteSynthImage(second, "2.25.6301", "2.25.6300", "20240110");
  {
    DcmFileFormat ff;
    REQUIRE(ff.loadFile(second.c_str()).good());
    // Large values are read lazily from the file; saving over it would truncate them.
    REQUIRE(ff.loadAllDataIntoMemory().good());
    ff.getDataset()->putAndInsertString(DCM_StationName, "ROOM-3");
    REQUIRE(ff.saveFile(second.c_str(), EXS_LittleEndianExplicit).good());
  }
  auto listen = f.Start();
  CHECK(f.StoreScu("MODALITY1", {first.file}, "storescu1.log") == 0);
  const fs::path kept = f.spool / "received" / SpoolFileName("2.25.6301");
  REQUIRE(fs::exists(kept));
  const auto kept_time = fs::last_write_time(kept);
  const auto kept_size = fs::file_size(kept);
  CHECK(f.StoreScu("MODALITY1", {second}, "storescu2.log") == 0);
  CHECK_MESSAGE(listen->Stop(SIGTERM) == 0, listen->Log());

  CHECK(f.SpoolCount() == 2);
  CHECK(fs::last_write_time(kept) == kept_time);
  CHECK(fs::file_size(kept) == kept_size);
  StoreCounts counts = f.Counts();
  CHECK_MESSAGE(Rows(counts) == 1, f.Log("listen.log"));
  CHECK(counts.duplicates == 1);
}

// Reads one PDU header (PS3.8 9.3.1: type, reserved, 4-byte big-endian length) and skips the
// body. Returns the PDU type, or -1 when the connection ended.
int ReadPdu(int fd) {
  unsigned char header[6] = {};
  if (::recv(fd, header, sizeof(header), MSG_WAITALL) != 6) return -1;
  uint32_t rest = (uint32_t(header[2]) << 24) | (uint32_t(header[3]) << 16) |
                  (uint32_t(header[4]) << 8) | uint32_t(header[5]);
  std::string body(rest, '\0');
  if (rest > 0 && ::recv(fd, body.data(), rest, MSG_WAITALL) != ssize_t(rest)) return -1;
  return header[0];
}

// With --max-associations 1, a second association while the first is open is refused as
// transient, "local limit exceeded" (PS3.8 9.3.4: result 2, source 3, reason 2), so the sender
// tries again later; once the first one has ended, sending works again.
TEST_CASE("AssociationsBeyondTheLimitAreRefusedForNow") {
  ListenFixture f;
  fs::create_directories(f.images);
  SynthImage s = WriteSynthImage(f.images / "a.dcm", "2.25.6201", "2.25.6200", "20240110");
  auto listen = f.Start({"--max-associations", "1"});
  // The start-up probe's connection may still hold the slot for a moment: retry, bounded.
  int held = -1;
  for (int attempt = 0; attempt < 50 && held < 0; ++attempt) {
    if (attempt > 0) std::this_thread::sleep_for(std::chrono::milliseconds(100));
    held = ConnectLoopback(f.port);
    REQUIRE(held >= 0);
    REQUIRE(SendAll(held, AssociateRq("BEAMTRIM", "MODALITY1")));
    if (ReadPdu(held) != 0x02) {  // not A-ASSOCIATE-AC
      ::close(held);
      held = -1;
    }
  }
  REQUIRE(held >= 0);  // this association now holds the only slot

  CHECK(f.StoreScu("MODALITY2", {s.file}, "storescu-busy.log") != 0);
  std::string busy = f.Log("storescu-busy.log");
  CHECK_MESSAGE(busy.find("Rejected Transient") != std::string::npos, busy);
  CHECK_MESSAGE(busy.find("Local Limit Exceeded") != std::string::npos, busy);
  CHECK(f.SpoolCount() == 0);

  ::close(held);
  // The server notices the closed connection on its own schedule: retry, bounded.
  int code = -1;
  for (int attempt = 0; attempt < 50 && code != 0; ++attempt) {
    if (attempt > 0) std::this_thread::sleep_for(std::chrono::milliseconds(100));
    code = f.StoreScu("MODALITY2", {s.file}, "storescu-after.log");
  }
  CHECK_MESSAGE(code == 0, f.Log("storescu-after.log"));
  CHECK_MESSAGE(listen->Stop(SIGTERM) == 0, listen->Log());
  CHECK(f.Recorded("2.25.6201"));
  CHECK(Rows(f.Counts()) == 1);
}

// Objects left in the spool by a killed server are measured when it starts again.
TEST_CASE("ObjectsLeftUnrecordedAreMeasuredOnTheNextStart") {
  ListenFixture f;
  fs::create_directories(f.spool / "received");
  fs::create_directories(f.spool / "tmp");
  WriteSynthImage(f.spool / "received" / SpoolFileName("2.25.7001"), "2.25.7001", "2.25.7002",
                  "20240110");
  std::ofstream(f.spool / "tmp" / "2.25.7003.dcm.1.0.part") << "partial";
  auto listen = f.Start();
  CHECK(listen->Stop(SIGTERM) == 0);
  CHECK(f.Recorded("2.25.7001"));
  CHECK(Rows(f.Counts()) == 1);
  CHECK(fs::is_empty(f.spool / "tmp"));
  // A second start finds nothing new to record.
  auto again = f.Start();
  CHECK(again->Stop(SIGTERM) == 0);
  CHECK(Rows(f.Counts()) == 1);
}

TEST_CASE("ListenRejectsBadOptionsWithUsageError") {
  TempDir dir;
  CHECK(Run({BEAMTRIM_BINARY, "listen", "--port", "104", "--aet", "THIS_AE_IS_TOO_LONG",
             "--store", (dir.path() / "s.sqlite").string(), "--spool",
             (dir.path() / "sp").string()},
            dir.path() / "log") == 2);
}

}  // namespace
}  // namespace beamtrim
