// Spool naming, atomic commit and argument parsing of the net layer.
#include <doctest/doctest.h>

#include <fstream>

#include <dcmtk/config/osconfig.h>
#include <dcmtk/dcmdata/dcdeftag.h>
#include <dcmtk/dcmdata/dcfilefo.h>
#include <dcmtk/dcmdata/dcmetinf.h>

#include "beamtrim/network.h"
#include "net/net_internal.h"
#include "net/net_test_util.h"

namespace beamtrim {
namespace {

using nettest::TempDir;
namespace fs = std::filesystem;

bool IsInside(const fs::path& child, const fs::path& folder) {
  fs::path c = fs::weakly_canonical(child);
  fs::path f = fs::weakly_canonical(folder);
  auto [fi, ci] = std::mismatch(f.begin(), f.end(), c.begin(), c.end());
  return fi == f.end();
}

// PS3.5 section 9.1: a UID is made of digits and dots only, at most 64 characters.
TEST_CASE("ValidUidIsUsedAsTheFileName") {
  CHECK(SpoolFileName("1.2.840.10008.5.1.4.1.1.1.1") == "1.2.840.10008.5.1.4.1.1.1.1.dcm");
}

TEST_CASE("TraversalCharactersNeverReachTheFileName") {
  for (const char* uid : {"../../etc/passwd", "..", ".", "/", "1.2/../../3", "1.2\\..\\3",
                          "", "....", "1.2.3\n", "~/x"}) {
    CAPTURE(uid);
    std::string name = SpoolFileName(uid);
    CHECK(name.find('/') == std::string::npos);
    CHECK(name.find('\\') == std::string::npos);
    CHECK(name.front() != '.');
    CHECK(name.size() > 4);
    CHECK(name.substr(name.size() - 4) == ".dcm");
    CHECK(name.find_first_not_of("0123456789.-abcdefuim") == std::string::npos);
  }
}

TEST_CASE("UidsThatSanitiseAlikeStayDistinct") {
  CHECK(SpoolFileName("1.2.34") != SpoolFileName("1.2.3/4"));
  CHECK(SpoolFileName("../1") != SpoolFileName("1"));
  CHECK(SpoolFileName("1.2.3") == SpoolFileName("1.2.3"));
}

TEST_CASE("OverlongUidGivesABoundedName") {
  std::string uid(500, '1');
  CHECK(SpoolFileName(uid).size() <= 64 + 1 + 16 + 4);
}

TEST_CASE("OpeningTheSpoolRemovesPartialFilesOnly") {
  TempDir dir;
  {
    Result<Spool> spool = Spool::Open(dir.path() / "spool");
    REQUIRE(spool.ok());
    std::ofstream(spool->tmp_dir() / "1.2.3.dcm.99.0.part") << "half an object";
    std::ofstream(spool->received_dir() / "1.2.4.dcm") << "complete object";
  }
  Result<Spool> spool = Spool::Open(dir.path() / "spool");
  REQUIRE(spool.ok());
  CHECK(fs::is_empty(spool->tmp_dir()));
  REQUIRE(spool->ReceivedFiles().size() == 1);
  CHECK(spool->ReceivedFiles()[0].filename() == "1.2.4.dcm");
}

TEST_CASE("DatasetWithTraversalUidIsWrittenInsideTheSpool") {
  TempDir dir;
  Result<Spool> spool = Spool::Open(dir.path() / "spool");
  REQUIRE(spool.ok());
  DcmDataset dataset;
  dataset.putAndInsertString(DCM_SOPClassUID, "1.2.840.10008.5.1.4.1.1.1.1");
  dataset.putAndInsertString(DCM_SOPInstanceUID, "../../../escaped");
  Result<CommitResult> written = net::WriteToSpool(*spool, dataset, EXS_LittleEndianExplicit);
  REQUIRE(written.ok());
  CHECK(IsInside(written->path, spool->received_dir()));
  CHECK(!fs::exists(dir.path() / "escaped"));
  CHECK(!fs::exists(dir.path() / "escaped.dcm"));
  CHECK(fs::is_empty(spool->tmp_dir()));
  // The object is intact: the UID inside the file is untouched, only the name is sanitised.
  DcmFileFormat file;
  REQUIRE(file.loadFile(written->path.c_str()).good());
  OFString uid;
  file.getDataset()->findAndGetOFString(DCM_SOPInstanceUID, uid);
  CHECK(uid == "../../../escaped");
}

TEST_CASE("DatasetWithoutSopInstanceUidIsRefused") {
  TempDir dir;
  Result<Spool> spool = Spool::Open(dir.path() / "spool");
  REQUIRE(spool.ok());
  DcmDataset dataset;
  dataset.putAndInsertString(DCM_SOPClassUID, "1.2.840.10008.5.1.4.1.1.1.1");
  Result<CommitResult> written = net::WriteToSpool(*spool, dataset, EXS_LittleEndianExplicit);
  REQUIRE(!written.ok());
  CHECK(written.error().attribute == "(0008,0018) SOP Instance UID");
  CHECK(spool->ReceivedFiles().empty());
}

std::string ReadAll(const fs::path& file) {
  std::ifstream in(file, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
}

fs::path TempWith(const Spool& spool, const std::string& uid, const std::string& bytes) {
  fs::path temp = spool.TempPath(uid);
  std::ofstream(temp, std::ios::binary) << bytes;
  return temp;
}

// The spool is append-only (docs/network.md): a resend of the same bytes is dropped, other
// bytes under a taken name are kept beside the first copy, which is never touched.
// Common practice for receive folders, no single source.
TEST_CASE("CommitNeverReplacesAFileAlreadyInTheSpool") {
  TempDir dir;
  Result<Spool> spool = Spool::Open(dir.path() / "spool");
  REQUIRE(spool.ok());
  const fs::path target = spool->ReceivedPath("1.2.3");

  Result<CommitResult> first = CommitSpoolFile(TempWith(*spool, "1.2.3", "first object"), target);
  REQUIRE(first.ok());
  CHECK(first->outcome == SpoolCommit::kStored);
  CHECK(first->path == target);

  Result<CommitResult> again = CommitSpoolFile(TempWith(*spool, "1.2.3", "first object"), target);
  REQUIRE(again.ok());
  CHECK(again->outcome == SpoolCommit::kAlreadyThere);
  CHECK(again->path == target);

  Result<CommitResult> other = CommitSpoolFile(TempWith(*spool, "1.2.3", "other object"), target);
  REQUIRE(other.ok());
  CHECK(other->outcome == SpoolCommit::kStoredAside);
  CHECK(other->path.filename() == "1.2.3-v2.dcm");
  CHECK(ReadAll(target) == "first object");
  CHECK(ReadAll(other->path) == "other object");

  // The same different object once more finds its own earlier copy.
  Result<CommitResult> other_again =
      CommitSpoolFile(TempWith(*spool, "1.2.3", "other object"), target);
  REQUIRE(other_again.ok());
  CHECK(other_again->outcome == SpoolCommit::kAlreadyThere);
  CHECK(other_again->path == other->path);

  CHECK(spool->ReceivedFiles().size() == 2);
  CHECK(fs::is_empty(spool->tmp_dir()));
}

TEST_CASE("ArchiveAddressIsParsedIntoHostPortAndAeTitle") {
  Result<ArchiveAddress> a = ParseArchiveAddress("127.0.0.1:11112:ARCHIVE");
  REQUIRE(a.ok());
  CHECK(a->host == "127.0.0.1");
  CHECK(a->port == 11112);
  CHECK(a->ae_title == "ARCHIVE");
  CHECK(!ParseArchiveAddress("127.0.0.1:ARCHIVE").ok());
  CHECK(!ParseArchiveAddress("host:0:AE").ok());
  CHECK(!ParseArchiveAddress("host:70000:AE").ok());
  CHECK(!ParseArchiveAddress(":104:AE").ok());
  // PS3.5 table 6.2-1: AE titles are at most 16 characters, no backslash.
  CHECK(!ParseArchiveAddress("host:104:SEVENTEEN_CHARS_X").ok());
  CHECK(!ParseArchiveAddress("host:104:A\\B").ok());
}

// Gregorian calendar rules (leap years: divisible by 4, except centuries not divisible by 400).
TEST_CASE("DatesAreCheckedAgainstTheCalendar") {
  CHECK(ParseDicomDate("2024-02-29").value() == "20240229");
  CHECK(ParseDicomDate("20000229").value() == "20000229");
  CHECK(!ParseDicomDate("19000229").ok());
  CHECK(!ParseDicomDate("2023-02-29").ok());
  CHECK(!ParseDicomDate("2024-13-01").ok());
  CHECK(!ParseDicomDate("2024-04-31").ok());
  CHECK(!ParseDicomDate("2024/01/01").ok());
  CHECK(!ParseDicomDate("yesterday").ok());
}

TEST_CASE("ListenOptionsOutOfRangeAreRejectedByName") {
  ListenOptions options;
  options.ae_title = "BEAMTRIM";
  CHECK(ValidateListenOptions(options).ok());
  options.max_associations = 0;
  CHECK(ValidateListenOptions(options).error().attribute == "--max-associations");
  options.max_associations = 4;
  options.allowed_calling_aets = {"WAY_TOO_LONG_AE_TITLE"};
  CHECK(ValidateListenOptions(options).error().attribute == "--allow");
}

}  // namespace
}  // namespace beamtrim
