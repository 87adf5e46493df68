// Internals shared by the dicom layer's source files: DCMTK attribute helpers and the
// OpenJPEG adapter. DCMTK and OpenJPEG types stay behind this header (never in include/).
// Stateless helpers; safe to call from several threads on different data sets.
#pragma once

#include <array>
#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <dcmtk/dcmdata/dctk.h>

#include "beamtrim/dicom.h"
#include "beamtrim/status.h"

namespace beamtrim::dicom_internal {

// "(0028,0010) Rows": the attribute label used in every error message.
std::string TagLabel(const DcmTagKey& key);

// Trimmed string value `index` of an attribute, empty when absent.
std::string GetString(DcmItem& item, const DcmTagKey& key, unsigned long index = 0);
std::optional<double> GetDouble(DcmItem& item, const DcmTagKey& key, unsigned long index = 0);
std::optional<long> GetInt(DcmItem& item, const DcmTagKey& key);
std::optional<std::array<double, 2>> GetPair(DcmItem& item, const DcmTagKey& key);

// Fills every RadiographHeader field found in `dataset`. Never fails: absent or unparsable
// attributes stay at their defaults; structural checks are the reader's job.
RadiographHeader ExtractHeader(DcmDataset& dataset);

// Refuses files with more than `max_items` Item tags (FFFE,E000): DCMTK parses nested
// sequences recursively, and the item count bounds the nesting depth (nesting_guard.cpp).
Status CheckItemCount(const std::string& file, size_t max_items);

// One decoded JPEG 2000 component. `values` points into the decoder's own image, which
// `owner` keeps alive: the component is not copied (an image of 8 million pixels is 32 MiB
// of int32 values, which the reader turns into the float image directly).
struct J2kImage {
  int width = 0;
  int height = 0;
  int components = 0;
  int precision = 0;
  bool is_signed = false;
  const int32_t* values = nullptr;  // first component, row-major, width x height
  std::shared_ptr<const void> owner;
};

// Decodes a J2K codestream or a JP2 file held in memory. `max_pixels` guards against a
// lying SIZ marker. Errors carry the reason only; the caller adds file and attribute.
Result<J2kImage> DecodeJ2k(const uint8_t* data, size_t size, int64_t max_pixels);

// Encodes one grey component as a J2K codestream: reversible 5/3 wavelet without rate
// limit when `lossless`, else irreversible 9/7 at `compression_ratio`:1.
Result<std::vector<uint8_t>> EncodeJ2k(const std::vector<int32_t>& values, int width,
                                       int height, int precision, bool is_signed,
                                       bool lossless, double compression_ratio);

// Decodes one RLE Lossless frame (PS3.5 Annex G) to native little-endian bytes, rows x
// columns x bytes_per_sample, with every read bounds-checked. Errors carry the reason only.
Result<std::vector<uint8_t>> DecodeRleFrame(const uint8_t* data, size_t size, int rows,
                                            int columns, int bytes_per_sample);

}  // namespace beamtrim::dicom_internal
