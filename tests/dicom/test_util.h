// Helpers shared by the dicom tests: temp folders and synthetic stored images.
// Everything here is synthetic ground truth made up for the tests.
#pragma once

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <random>
#include <string>

#include "beamtrim/dicom.h"
#include "beamtrim/dicom_writer.h"

namespace beamtrim::test {

// A fresh folder under the system temp dir, removed when the object goes away.
class TempDir {
 public:
  explicit TempDir(const std::string& tag) {
    std::random_device rd;
    path_ = std::filesystem::temp_directory_path() /
            ("beamtrim-dicom-" + tag + "-" + std::to_string(rd()));
    std::filesystem::create_directories(path_);
  }
  ~TempDir() {
    std::error_code ec;
    std::filesystem::remove_all(path_, ec);
  }
  const std::filesystem::path& path() const { return path_; }
  std::filesystem::path operator/(const std::string& name) const { return path_ / name; }

 private:
  std::filesystem::path path_;
};

// A smooth ramp with a bright rectangle (an exposed field) and mild noise, spanning most of
// the stored range so that bit-level mistakes show.
inline StoredPixels MakePixels(int width, int height, int bits_stored, bool is_signed,
                               unsigned seed = 7) {
  StoredPixels p;
  p.width = width;
  p.height = height;
  p.values.resize(static_cast<size_t>(width) * height);
  int64_t lo = is_signed ? -(int64_t{1} << (bits_stored - 1)) : 0;
  int64_t hi = is_signed ? (int64_t{1} << (bits_stored - 1)) - 1 : (int64_t{1} << bits_stored) - 1;
  std::mt19937 rng(seed);
  std::uniform_int_distribution<int> noise(-3, 3);
  for (int y = 0; y < height; ++y) {
    for (int x = 0; x < width; ++x) {
      double t = 0.15 + 0.25 * x / width + 0.1 * y / height;
      if (x > width / 4 && x < 3 * width / 4 && y > height / 5 && y < 4 * height / 5) t += 0.45;
      int64_t v = lo + static_cast<int64_t>(t * static_cast<double>(hi - lo)) + noise(rng);
      p.values[static_cast<size_t>(y) * width + x] = static_cast<int32_t>(std::clamp(v, lo, hi));
    }
  }
  return p;
}

inline RadiographHeader MakeHeader(const StoredPixels& p, int bits_allocated, int bits_stored,
                                   bool is_signed) {
  RadiographHeader h;
  h.modality = "DX";
  h.photometric_interpretation = "MONOCHROME2";
  h.rows = p.height;
  h.columns = p.width;
  h.bits_allocated = bits_allocated;
  h.bits_stored = bits_stored;
  h.high_bit = bits_stored - 1;
  h.pixel_representation = is_signed ? 1 : 0;
  h.pixel_intensity_relationship_sign = 1;  // larger stored value = more radiation
  return h;
}

}  // namespace beamtrim::test

#include <fstream>
#include <iterator>
#include <vector>

#include <dcmtk/dcmdata/dctk.h>

namespace beamtrim::test {

// A minimal DX data set built directly with DCMTK (not with beamtrim's writer), for inputs
// the writer refuses to make: colour, multi-frame, lying sizes, missing pixel data.
inline void PutMinimalDx(DcmDataset& ds, int rows, int columns, const char* modality = "DX") {
  ds.putAndInsertString(DCM_SOPClassUID, UID_DigitalXRayImageStorageForPresentation);
  ds.putAndInsertString(DCM_SOPInstanceUID, "1.2.826.0.1.3680043.2.1125.99.1");
  ds.putAndInsertString(DCM_StudyInstanceUID, "1.2.826.0.1.3680043.2.1125.99.2");
  ds.putAndInsertString(DCM_SeriesInstanceUID, "1.2.826.0.1.3680043.2.1125.99.3");
  ds.putAndInsertString(DCM_Modality, modality);
  ds.putAndInsertUint16(DCM_SamplesPerPixel, 1);
  ds.putAndInsertString(DCM_PhotometricInterpretation, "MONOCHROME2");
  ds.putAndInsertUint16(DCM_Rows, static_cast<Uint16>(rows));
  ds.putAndInsertUint16(DCM_Columns, static_cast<Uint16>(columns));
  ds.putAndInsertUint16(DCM_BitsAllocated, 16);
  ds.putAndInsertUint16(DCM_BitsStored, 12);
  ds.putAndInsertUint16(DCM_HighBit, 11);
  ds.putAndInsertUint16(DCM_PixelRepresentation, 0);
  ds.putAndInsertSint16(DCM_PixelIntensityRelationshipSign, 1);
}

inline void PutRamp16(DcmDataset& ds, size_t count, Uint16 offset = 0) {
  std::vector<Uint16> v(count);
  for (size_t i = 0; i < count; ++i) v[i] = static_cast<Uint16>((i * 7 + offset) % 4096);
  ds.putAndInsertUint16Array(DCM_PixelData, v.data(), static_cast<unsigned long>(count));
}

inline bool SaveDcmtk(DcmFileFormat& ff, const std::filesystem::path& file,
                      E_TransferSyntax xfer = EXS_LittleEndianExplicit) {
  return ff.saveFile(file.string().c_str(), xfer).good();
}

inline std::vector<char> ReadBytes(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  return std::vector<char>(std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>());
}

inline void WriteBytes(const std::filesystem::path& file, const std::vector<char>& bytes) {
  std::ofstream out(file, std::ios::binary);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

}  // namespace beamtrim::test
