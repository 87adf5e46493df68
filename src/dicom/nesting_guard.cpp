// A guard run before DCMTK parses a file. DCMTK reads nested sequences recursively, so a file
// with sequences nested some ten thousand deep exhausts the thread's stack (found with the
// broken-file corpus: 20 000 levels crash an 8 MiB stack). Nesting depth cannot exceed the
// number of Item tags (FFFE,E000) in the file, so counting them bounds the depth without a
// second parser. Real radiographs hold a few dozen items (plus one per compressed fragment).
#include <cstring>
#include <fstream>
#include <vector>

#include "dicom/dicom_internal.h"

namespace beamtrim::dicom_internal {

Status CheckItemCount(const std::string& file, size_t max_items) {
  std::ifstream in(file, std::ios::binary);
  if (!in) return MakeError(ErrorKind::kUnreadable, file, "cannot open the file");
  // Item tag in little endian (FE FF 00 E0) and big endian (FF FE E0 00) byte order.
  static const unsigned char kLittle[4] = {0xFE, 0xFF, 0x00, 0xE0};
  static const unsigned char kBig[4] = {0xFF, 0xFE, 0xE0, 0x00};
  // 64 KiB: below the allocator's mmap threshold, so every file reuses heap memory instead of
  // mapping (and faulting in) fresh pages for a buffer read once.
  std::vector<char> buf(1 << 16);
  size_t items = 0;
  size_t carry = 0;  // bytes kept from the previous block so a tag across blocks is seen
  while (in) {
    in.read(buf.data() + carry, static_cast<std::streamsize>(buf.size() - carry));
    size_t n = carry + static_cast<size_t>(in.gcount());
    if (n < 4) break;
    const unsigned char* p = reinterpret_cast<const unsigned char*>(buf.data());
    for (size_t i = 0; i + 4 <= n; ++i) {
      if ((p[i] == 0xFE || p[i] == 0xFF) &&
          (std::memcmp(p + i, kLittle, 4) == 0 || std::memcmp(p + i, kBig, 4) == 0)) {
        if (++items > max_items) {
          return MakeError(ErrorKind::kMalformed, file,
                           "more than " + std::to_string(max_items) +
                               " sequence items: refused, as nesting that deep would exhaust "
                               "the parser",
                           "(FFFE,E000) Item");
        }
      }
    }
    std::memmove(buf.data(), buf.data() + n - 3, 3);
    carry = 3;
  }
  return Status::Ok();
}

}  // namespace beamtrim::dicom_internal
