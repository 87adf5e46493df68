// Finding inputs: the cheap DICOM sniff, DICOMDIR listing and writing, and the recursive
// walk over files and folders that feeds a batch.
#include <algorithm>
#include <cctype>
#include <fstream>
#include <set>

#include <dcmtk/dcmdata/dcddirif.h>

#include "beamtrim/dicom_writer.h"
#include "dicom/dicom_internal.h"

namespace beamtrim {
namespace fs = std::filesystem;
using namespace dicom_internal;

bool LooksLikeDicom(const fs::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) return false;
  unsigned char b[132] = {};
  in.read(reinterpret_cast<char*>(b), sizeof b);
  std::streamsize n = in.gcount();
  // PS3.10 7.1: 128-byte preamble then "DICM".
  if (n == 132 && b[128] == 'D' && b[129] == 'I' && b[130] == 'C' && b[131] == 'M') return true;
  if (n < 8) return false;
  // A bare data set starts with a low group tag: (0002,xxxx) or (0008,xxxx), little or big
  // endian, followed by an explicit VR of two upper-case letters or a 32-bit implicit length
  // (common practice, no single source: that is how DCMTK and others sniff raw data sets).
  unsigned group_le = b[0] | (b[1] << 8), group_be = (b[0] << 8) | b[1];
  bool low_group = group_le == 0x0002 || group_le == 0x0008 || group_be == 0x0008;
  if (!low_group) return false;
  bool vr = std::isupper(b[4]) && std::isupper(b[5]);
  uint32_t implicit_len = b[4] | (b[5] << 8) | (b[6] << 16) | (static_cast<uint32_t>(b[7]) << 24);
  return vr || implicit_len < (1u << 20);
}

namespace {

bool IsDicomdirName(const fs::path& p) {
  std::string name = p.filename().string();
  std::transform(name.begin(), name.end(), name.begin(), [](unsigned char c) { return std::toupper(c); });
  return name == "DICOMDIR";
}

// Media written on case-insensitive systems are often copied with lower-case names, while
// the Referenced File ID is upper case (PS3.10 8.5): fall back to a case-insensitive match.
fs::path ResolveComponent(const fs::path& dir, const std::string& component) {
  fs::path exact = dir / component;
  std::error_code ec;
  if (fs::exists(exact, ec)) return exact;
  for (fs::directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
    std::string name = it->path().filename().string();
    if (name.size() == component.size() &&
        std::equal(name.begin(), name.end(), component.begin(), [](char a, char b) {
          return std::toupper(static_cast<unsigned char>(a)) == std::toupper(static_cast<unsigned char>(b));
        })) {
      return it->path();
    }
  }
  return exact;
}

}  // namespace

Result<std::vector<fs::path>> ListDicomdir(const fs::path& dicomdir) {
  std::string name = dicomdir.string();
  std::error_code ec;
  if (!fs::is_regular_file(dicomdir, ec)) return MakeError(ErrorKind::kNotFound, name, "DICOMDIR not found");
  DcmFileFormat ff;
  OFCondition cond = ff.loadFile(name.c_str(), EXS_Unknown, EGL_noChange, 64 * 1024, ERM_autoDetect);
  if (cond.bad()) return MakeError(ErrorKind::kMalformed, name, std::string("DICOMDIR unreadable: ") + cond.text());
  DcmSequenceOfItems* records = nullptr;
  if (ff.getDataset()->findAndGetSequence(DCM_DirectoryRecordSequence, records).bad() || records == nullptr) {
    return MakeError(ErrorKind::kMalformed, name, "no directory records", TagLabel(DCM_DirectoryRecordSequence));
  }
  fs::path folder = dicomdir.parent_path();
  if (folder.empty()) folder = ".";
  std::vector<fs::path> out;
  for (unsigned long i = 0; i < records->card(); ++i) {
    DcmItem* rec = records->getItem(i);
    // PS3.3 F.5: IMAGE records reference the image files; other record types are skipped.
    if (GetString(*rec, DCM_DirectoryRecordType) != "IMAGE") continue;
    OFString id_all;
    if (rec->findAndGetOFStringArray(DCM_ReferencedFileID, id_all).bad() || id_all.empty()) continue;
    std::string ids = id_all.c_str();
    fs::path path = folder;
    size_t start = 0;
    while (start <= ids.size()) {
      size_t end = ids.find('\\', start);
      std::string comp = ids.substr(start, end == std::string::npos ? std::string::npos : end - start);
      while (!comp.empty() && comp.back() == ' ') comp.pop_back();
      // PS3.10 8.2 / 8.5: components are 1-8 characters of A-Z, 0-9 and '_'; anything that
      // could climb out of the DICOMDIR's folder is refused.
      if (comp.empty() || comp == "." || comp == ".." || comp.find('/') != std::string::npos) {
        return MakeError(ErrorKind::kMalformed, name,
                         "record " + std::to_string(i + 1) + " refers outside the DICOMDIR folder: '" + ids + "'",
                         TagLabel(DCM_ReferencedFileID));
      }
      path = ResolveComponent(path, comp);
      if (end == std::string::npos) break;
      start = end + 1;
    }
    out.push_back(path);
  }
  return out;
}

Status WriteDicomdir(const fs::path& folder, const std::vector<fs::path>& files) {
  std::string dir = folder.string();
  fs::path target = folder / "DICOMDIR";
  DicomDirInterface ddir;
  ddir.enableInventMode(OFTrue);           // fill type 1 keys the images leave empty
  ddir.enableInventPatientIDMode(OFTrue);  // beamtrim files carry no patient ID
  // Compressed syntaxes are listed too; the strict STD-GEN-CD profile allows only explicit
  // little endian (PS3.11), so that one check is relaxed (docs/dicom.md).
  ddir.disableTransferSyntaxCheck(OFTrue);
  OFCondition cond = ddir.createNewDicomDir(DicomDirInterface::AP_GeneralPurpose, target.string().c_str(), "BEAMTRIM");
  if (cond.bad()) return MakeError(ErrorKind::kUnreadable, target.string(), std::string("cannot create DICOMDIR: ") + cond.text());
  for (const fs::path& f : files) {
    std::string id = f.generic_string();
    if (!ddir.isFilenameValid(id.c_str())) {
      return MakeError(ErrorKind::kInvalidInput, id,
                       "not a DICOM file ID (upper-case A-Z 0-9 _, at most 8 characters per component)",
                       TagLabel(DCM_ReferencedFileID));
    }
    cond = ddir.addDicomFile(id.c_str(), dir.c_str());
    if (cond.bad()) return MakeError(ErrorKind::kInvalidInput, (folder / f).string(), std::string("cannot add to DICOMDIR: ") + cond.text());
  }
  cond = ddir.writeDicomDir();
  if (cond.bad()) return MakeError(ErrorKind::kUnreadable, target.string(), std::string("cannot write DICOMDIR: ") + cond.text());
  return Status::Ok();
}

namespace {

struct Walker {
  static constexpr int kMaxDepth = 64;
  std::set<fs::path> files;
  std::vector<Error> problems;

  void AddFile(const fs::path& p) {
    if (IsDicomdirName(p)) {
      Result<std::vector<fs::path>> listed = ListDicomdir(p);
      if (!listed) {
        problems.push_back(listed.error());
        return;
      }
      for (const fs::path& f : *listed) files.insert(f.lexically_normal());
    } else if (LooksLikeDicom(p)) {
      files.insert(p.lexically_normal());
    }
  }

  // Manual recursion so that each unreadable folder becomes a problem and the walk goes on.
  // Symlinked folders are not entered, so link loops cannot recurse for ever.
  void Walk(const fs::path& dir, int depth) {
    if (depth > kMaxDepth) {
      problems.push_back(MakeError(ErrorKind::kUnreadable, dir.string(), "folders nested too deep"));
      return;
    }
    std::error_code ec;
    fs::directory_iterator it(dir, ec), end;
    if (ec) {
      problems.push_back(MakeError(ErrorKind::kUnreadable, dir.string(), ec.message()));
      return;
    }
    std::vector<fs::path> subdirs;
    for (; it != end; it.increment(ec)) {
      if (ec) {
        problems.push_back(MakeError(ErrorKind::kUnreadable, dir.string(), ec.message()));
        break;
      }
      std::error_code fe;
      if (it->is_symlink(fe) && it->is_directory(fe)) continue;
      if (it->is_directory(fe)) subdirs.push_back(it->path());
      else if (it->is_regular_file(fe)) AddFile(it->path());
    }
    for (const fs::path& sub : subdirs) Walk(sub, depth + 1);
  }

  void Add(const fs::path& p) {
    std::error_code ec;
    fs::file_status st = fs::status(p, ec);
    if (ec || !fs::exists(st)) {
      problems.push_back(MakeError(ErrorKind::kNotFound, p.string(), "no such file or folder"));
    } else if (fs::is_directory(st)) {
      Walk(p, 0);
    } else if (fs::is_regular_file(st)) {
      AddFile(p);
    } else {
      problems.push_back(MakeError(ErrorKind::kUnreadable, p.string(), "not a regular file or folder"));
    }
  }
};

}  // namespace

InputList FindDicomInputs(const std::vector<fs::path>& paths) {
  Walker w;
  for (const fs::path& p : paths) w.Add(p);
  InputList out;
  out.files.assign(w.files.begin(), w.files.end());
  out.problems = std::move(w.problems);
  return out;
}

}  // namespace beamtrim
