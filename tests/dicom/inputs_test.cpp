// Input discovery: DICOMDIR writing and listing, the folder walk and the DICOM sniff.
#include <doctest/doctest.h>

#include <fstream>

#include "dicom/test_util.h"

using namespace beamtrim;
using beamtrim::test::MakeHeader;
using beamtrim::test::MakePixels;
using beamtrim::test::TempDir;
namespace fs = std::filesystem;

namespace {

void WriteImage(const fs::path& f) {
  fs::create_directories(f.parent_path());
  StoredPixels px = MakePixels(16, 16, 12, false);
  RadiographHeader h = MakeHeader(px, 16, 12, false);
  h.study_date = "20260110";
  REQUIRE(WriteRadiograph(h, px, f).ok());
}

}  // namespace

TEST_CASE("DicomdirListsTheFilesItWasWrittenWith") {
  // PS3.10 8.2: file IDs are upper case, up to 8 characters per component.
  TempDir dir("ddir");
  WriteImage(dir / "IMAGES/IM000001");
  WriteImage(dir / "IMAGES/IM000002");
  WriteImage(dir / "IM000003");
  Status s = WriteDicomdir(dir.path(), {"IMAGES/IM000001", "IMAGES/IM000002", "IM000003"});
  REQUIRE_MESSAGE(s.ok(), s.error().ToString());
  Result<std::vector<fs::path>> listed = ListDicomdir(dir / "DICOMDIR");
  REQUIRE_MESSAGE(listed.ok(), listed.error().ToString());
  std::vector<fs::path> got = *listed;
  std::sort(got.begin(), got.end());
  REQUIRE(got.size() == 3);
  CHECK(got[0] == dir / "IM000003");
  CHECK(got[1] == dir / "IMAGES" / "IM000001");
  CHECK(got[2] == dir / "IMAGES" / "IM000002");
  for (const fs::path& f : got) CHECK(ReadRadiograph(f).ok());
}

TEST_CASE("WriteDicomdirRefusesNonCompliantFileIds") {
  TempDir dir("ddirbad");
  WriteImage(dir / "lower.dcm");
  Status s = WriteDicomdir(dir.path(), {"lower.dcm"});
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().ToString().find("lower.dcm") != std::string::npos);
}

TEST_CASE("DicomdirEntryLeavingItsFolderIsRefused") {
  TempDir dir("ddiresc");
  WriteImage(dir / "IM000001");
  REQUIRE(WriteDicomdir(dir.path(), {"IM000001"}).ok());
  // Rewrite the record's Referenced File ID to climb out with '..'.
  DcmFileFormat ff;
  REQUIRE(ff.loadFile((dir / "DICOMDIR").string().c_str()).good());
  DcmSequenceOfItems* seq = nullptr;
  REQUIRE(ff.getDataset()->findAndGetSequence(DCM_DirectoryRecordSequence, seq).good());
  bool patched = false;
  for (unsigned long i = 0; i < seq->card(); ++i) {
    DcmItem* rec = seq->getItem(i);
    if (rec->tagExistsWithValue(DCM_ReferencedFileID)) {
      rec->putAndInsertString(DCM_ReferencedFileID, "..\\SECRET");
      patched = true;
    }
  }
  REQUIRE(patched);
  REQUIRE(ff.saveFile((dir / "DICOMDIR").string().c_str(), EXS_LittleEndianExplicit).good());
  Result<std::vector<fs::path>> listed = ListDicomdir(dir / "DICOMDIR");
  REQUIRE_FALSE(listed.ok());
  CHECK(listed.error().attribute.find("(0004,1500)") != std::string::npos);
  CHECK(listed.error().ToString().find("DICOMDIR") != std::string::npos);

  InputList inputs = FindDicomInputs({dir.path()});  // the walk reports it and goes on
  CHECK(inputs.problems.size() == 1);
  CHECK(inputs.files.size() == 1);  // IM000001 itself still looks like DICOM
}

TEST_CASE("FindDicomInputsWalksFoldersSortsAndDeduplicates") {
  TempDir dir("walk");
  WriteImage(dir / "IMAGES/IM000001");
  WriteImage(dir / "b/second.dcm");
  WriteImage(dir / "a/first.dcm");
  REQUIRE(WriteDicomdir(dir.path(), {"IMAGES/IM000001"}).ok());
  std::ofstream(dir / "a/readme.txt") << "not an image\n";
  fs::create_directory_symlink(dir.path(), dir / "b/loop");  // must not recurse for ever
  InputList inputs = FindDicomInputs({dir.path(), dir / "a/first.dcm", dir / "missing"});
  std::vector<fs::path> want = {dir / "IMAGES/IM000001", dir / "a/first.dcm", dir / "b/second.dcm"};
  std::sort(want.begin(), want.end());
  CHECK(inputs.files == want);
  REQUIRE(inputs.problems.size() == 1);
  CHECK(inputs.problems[0].kind == ErrorKind::kNotFound);
  CHECK(inputs.problems[0].file.find("missing") != std::string::npos);
}

TEST_CASE("LooksLikeDicomRecognisesPart10Files") {
  TempDir dir("sniff");
  WriteImage(dir / "x.dcm");
  CHECK(LooksLikeDicom(dir / "x.dcm"));
  std::ofstream(dir / "short.bin") << "DI";
  CHECK_FALSE(LooksLikeDicom(dir / "short.bin"));
  CHECK_FALSE(LooksLikeDicom(dir / "absent"));
}

TEST_CASE("DicomdirFilesCopiedWithLowerCaseNamesAreFound") {
  // Media copied from case-insensitive systems often arrive with lower-case names while the
  // Referenced File ID stays upper case (PS3.10 8.5 allows only upper case).
  TempDir dir("ddircase");
  WriteImage(dir / "IMAGES/IM000001");
  REQUIRE(WriteDicomdir(dir.path(), {"IMAGES/IM000001"}).ok());
  fs::rename(dir / "IMAGES/IM000001", dir / "IMAGES/im000001");
  fs::rename(dir / "IMAGES", dir / "images");
  Result<std::vector<fs::path>> listed = ListDicomdir(dir / "DICOMDIR");
  REQUIRE_MESSAGE(listed.ok(), listed.error().ToString());
  REQUIRE(listed->size() == 1);
  CHECK((*listed)[0] == dir / "images" / "im000001");
  CHECK(ReadRadiograph((*listed)[0]).ok());
}
