// Writes the broken-file corpus (testdata/broken/) from valid synthetic DX files: each output
// breaks one rule of DICOM PS3.5/PS3.10 in a way seen in the wild or by fuzzing. The names say
// what is broken; tests/dicom/broken_corpus_test.cpp expects every one to give a clear error.
// Usage: make_broken_corpus OUT_DIR
#include <algorithm>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <iterator>
#include <string>
#include <vector>

#include "beamtrim/dicom.h"
#include "beamtrim/dicom_writer.h"

namespace fs = std::filesystem;
using Bytes = std::vector<uint8_t>;
using namespace beamtrim;

namespace {

RadiographHeader BaseHeader(int rows, int cols) {
  RadiographHeader h;
  h.sop_class_uid = "1.2.840.10008.5.1.4.1.1.1.1";  // Digital X-Ray Image Storage - For Presentation
  h.sop_instance_uid = "2.25.31415926535897932384626433832795";
  h.study_instance_uid = "2.25.27182818284590452353602874713526";
  h.series_instance_uid = "2.25.16180339887498948482045868343656";
  h.modality = "DX";
  h.presentation_intent_type = "FOR PRESENTATION";
  h.photometric_interpretation = "MONOCHROME2";
  h.rows = rows;
  h.columns = cols;
  h.bits_allocated = 16;
  h.bits_stored = 12;
  h.high_bit = 11;
  h.imager_pixel_spacing = std::array<double, 2>{0.5, 0.5};
  h.body_part_examined = "HAND";
  h.station_name = "SYNTH-ROOM-1";
  h.operators_name = "RT-00";
  h.study_date = "20261102";
  return h;
}

StoredPixels Ramp(int rows, int cols, int max_value) {
  StoredPixels p;
  p.width = cols;
  p.height = rows;
  p.values.resize(static_cast<size_t>(rows) * cols);
  for (int y = 0; y < rows; ++y)
    for (int x = 0; x < cols; ++x) p.values[y * cols + x] = (x * 37 + y * 11) % (max_value + 1);
  return p;
}

Bytes MakeValid(const fs::path& scratch, TransferSyntax syntax, int bits = 12) {
  RadiographHeader h = BaseHeader(64, 48);
  h.bits_stored = bits;
  h.high_bit = bits - 1;
  if (bits <= 8) h.bits_allocated = 8;
  WriteOptions options;
  options.syntax = syntax;
  Status st = WriteRadiograph(h, Ramp(64, 48, (1 << bits) - 1), scratch, options);
  if (!st.ok()) {
    std::cerr << "make_broken_corpus: " << st.error().ToString() << "\n";
    std::exit(1);
  }
  std::ifstream in(scratch, std::ios::binary);
  return Bytes(std::istreambuf_iterator<char>(in), {});
}

// Offset of an explicit-VR little-endian element header for (group, element), or npos.
size_t FindTag(const Bytes& b, uint16_t group, uint16_t element, size_t from = 132) {
  for (size_t i = from; i + 8 <= b.size(); ++i) {
    if (b[i] == (group & 0xff) && b[i + 1] == (group >> 8) && b[i + 2] == (element & 0xff) &&
        b[i + 3] == (element >> 8) && std::isupper(b[i + 4]) && std::isupper(b[i + 5])) {
      return i;
    }
  }
  return std::string::npos;
}

void Put16(Bytes& b, size_t at, uint16_t v) {
  b[at] = v & 0xff;
  b[at + 1] = v >> 8;
}
void Put32(Bytes& b, size_t at, uint32_t v) {
  for (int k = 0; k < 4; ++k) b[at + k] = (v >> (8 * k)) & 0xff;
}

class Corpus {
 public:
  explicit Corpus(fs::path dir) : dir_(std::move(dir)) { fs::create_directories(dir_); }
  void Add(const std::string& name, const Bytes& bytes) {
    std::ofstream out(dir_ / (name + ".dcm"), std::ios::binary | std::ios::trunc);
    out.write(reinterpret_cast<const char*>(bytes.data()), static_cast<std::streamsize>(bytes.size()));
    ++count_;
  }
  int count() const { return count_; }

 private:
  fs::path dir_;
  int count_ = 0;
};

// US value of an explicit VR LE element: header is tag(4) VR(2) length(2), value at +8.
void SetUs(Bytes& b, uint16_t g, uint16_t e, uint16_t v) {
  size_t at = FindTag(b, g, e);
  if (at != std::string::npos) Put16(b, at + 8, v);
}

void AddTruncations(Corpus& c, const Bytes& valid, const std::string& stem) {
  // Cut inside the preamble, the meta header, the data set and the pixel data.
  for (size_t cut : {size_t{0}, size_t{1}, size_t{64}, size_t{131}, size_t{132}, size_t{140},
                     size_t{200}, valid.size() / 4, valid.size() / 2, valid.size() - 100,
                     valid.size() - 1}) {
    if (cut >= valid.size()) continue;
    c.Add(stem + "-truncated-at-" + std::to_string(cut), Bytes(valid.begin(), valid.begin() + cut));
  }
}

Bytes DeepSequences(const Bytes& valid, int depth) {
  // Nested sequences of undefined length inserted before Pixel Data: SQ (FFFE,E000) item ...
  size_t pixel = FindTag(valid, 0x7FE0, 0x0010);
  Bytes nest;
  auto push = [&](std::initializer_list<uint8_t> v) { nest.insert(nest.end(), v); };
  for (int i = 0; i < depth; ++i) {
    push({0x09, 0x00, 0x10, 0x10, 'S', 'Q', 0, 0, 0xFF, 0xFF, 0xFF, 0xFF});  // (0009,1010) SQ
    push({0xFE, 0xFF, 0x00, 0xE0, 0xFF, 0xFF, 0xFF, 0xFF});                    // item, undefined
  }
  for (int i = 0; i < depth; ++i) {
    push({0xFE, 0xFF, 0x0D, 0xE0, 0, 0, 0, 0});  // item delimiter
    push({0xFE, 0xFF, 0xDD, 0xE0, 0, 0, 0, 0});  // sequence delimiter
  }
  Bytes out(valid.begin(), valid.begin() + pixel);
  out.insert(out.end(), nest.begin(), nest.end());
  out.insert(out.end(), valid.begin() + pixel, valid.end());
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::cerr << "usage: make_broken_corpus OUT_DIR\n";
    return 2;
  }
  Corpus c(argv[1]);
  fs::path scratch = fs::temp_directory_path() / "beamtrim-broken-scratch.dcm";

  const Bytes plain = MakeValid(scratch, TransferSyntax::kExplicitLittle);
  AddTruncations(c, plain, "explicit");

  c.Add("not-dicom-text", Bytes{'h', 'e', 'l', 'l', 'o', '\n'});
  c.Add("empty", Bytes{});
  Bytes zeros(4096, 0);
  c.Add("zeros-4k", zeros);
  Bytes no_magic = plain;
  std::memcpy(no_magic.data() + 128, "DICX", 4);
  c.Add("bad-magic", no_magic);

  Bytes b = plain;
  SetUs(b, 0x0028, 0x0010, 0);
  c.Add("zero-rows", b);
  b = plain;
  SetUs(b, 0x0028, 0x0010, 65535);
  SetUs(b, 0x0028, 0x0011, 65535);
  c.Add("declared-65535x65535", b);
  b = plain;
  SetUs(b, 0x0028, 0x0010, 128);  // twice the rows the pixel data holds
  c.Add("pixel-data-shorter-than-rows-x-columns", b);
  b = plain;
  SetUs(b, 0x0028, 0x0010, 16);  // a quarter of the rows: pixel data longer than declared
  c.Add("pixel-data-longer-than-rows-x-columns", b);
  b = plain;
  SetUs(b, 0x0028, 0x0100, 12);  // Bits Allocated 12 with 16-bit data
  c.Add("bits-allocated-12", b);
  b = plain;
  SetUs(b, 0x0028, 0x0101, 20);  // Bits Stored larger than Bits Allocated
  c.Add("bits-stored-over-allocated", b);
  b = plain;
  SetUs(b, 0x0028, 0x0002, 3);  // three samples but one plane of data
  c.Add("samples-per-pixel-3", b);

  // Element lengths that lie.
  size_t pix = FindTag(plain, 0x7FE0, 0x0010);
  b = plain;
  Put32(b, pix + 8, 0xFFFFFFF0u);  // OW: tag VR 00 00 length32
  c.Add("pixel-data-huge-length", b);
  b = plain;
  size_t sop = FindTag(plain, 0x0008, 0x0018);
  if (sop != std::string::npos) {
    Put16(b, sop + 6, 0xFFF0);
    c.Add("uid-length-past-end", b);
  }
  b = plain;
  size_t rows_at = FindTag(plain, 0x0028, 0x0010);
  Put16(b, rows_at + 6, 3);  // US with an odd length
  c.Add("rows-odd-length", b);
  b = plain;
  b[rows_at + 4] = 'Z';
  b[rows_at + 5] = 'Q';  // an unknown VR
  c.Add("rows-unknown-vr", b);
  b = plain;
  b[rows_at + 4] = 'S';
  b[rows_at + 5] = 'Q';  // Rows declared as a sequence
  c.Add("rows-as-sequence", b);
  b = plain;
  size_t meta_len = FindTag(plain, 0x0002, 0x0000, 128);
  if (meta_len != std::string::npos) {
    Put32(b, meta_len + 8, 0x7FFFFFFF);
    c.Add("meta-group-length-huge", b);
  }
  c.Add("sequences-nested-20000-deep", DeepSequences(plain, 20000));

  b = plain;
  size_t ts = FindTag(plain, 0x0002, 0x0010, 128);
  if (ts != std::string::npos) {
    uint16_t len = b[ts + 6] | (b[ts + 7] << 8);
    std::string fake = "1.2.3.4.5.6.7.8.9.10";
    fake.resize(len, '\0');
    std::memcpy(b.data() + ts + 8, fake.data(), len);
    c.Add("unknown-transfer-syntax", b);
  }
  b = Bytes(plain.begin(), plain.begin() + pix);
  c.Add("no-pixel-data", b);
  if (ts != std::string::npos) {
    // RLE Lossless (PS3.5 A.4.2, UID 1.2.840.10008.1.2.5) declared, but the pixel data kept
    // native with a defined length, as PS3.5 A.4 forbids for encapsulated syntaxes. Both UIDs
    // have 19 characters, so the element keeps its length.
    b = plain;
    std::memcpy(b.data() + ts + 8, "1.2.840.10008.1.2.5", 19);
    c.Add("rle-syntax-native-pixel-data", b);
  }

  // Compressed streams cut or damaged.
  for (auto [syntax, stem] : {std::pair{TransferSyntax::kRle, "rle"},
                              std::pair{TransferSyntax::kJpegLossless, "jpeg-lossless"},
                              std::pair{TransferSyntax::kJpegLsLossless, "jpegls"},
                              std::pair{TransferSyntax::kJpeg2000Lossless, "j2k"},
                              std::pair{TransferSyntax::kDeflated, "deflated"}}) {
    Bytes valid = MakeValid(scratch, syntax);
    c.Add(std::string(stem) + "-cut-in-half", Bytes(valid.begin(), valid.begin() + valid.size() / 2));
    c.Add(std::string(stem) + "-cut-near-end", Bytes(valid.begin(), valid.end() - 24));
    if (syntax == TransferSyntax::kDeflated) continue;
    // Damage the bytes right after the first fragment's item header.
    size_t px = FindTag(valid, 0x7FE0, 0x0010);
    Bytes damaged = valid;
    if (px != std::string::npos) {
      // pixel header (12) + basic offset table item (8 + its length, usually 0) + item header (8)
      size_t start = px + 12 + 8 + 8;
      for (size_t k = start; k < std::min(start + 48, damaged.size()); ++k) damaged[k] ^= 0x5A;
      c.Add(std::string(stem) + "-fragment-header-damaged", damaged);
    }
  }
  // Rows doubled over an intact JPEG lossless / JPEG-LS frame (a fuzzing finding): the
  // frame header (ITU-T T.81 B.2.2, T.87 C.2.2) still says 64 lines.
  for (auto [syntax, stem] : {std::pair{TransferSyntax::kJpegLossless, "jpeg-lossless"},
                              std::pair{TransferSyntax::kJpegLsLossless, "jpegls"}}) {
    Bytes lying = MakeValid(scratch, syntax);
    SetUs(lying, 0x0028, 0x0010, 128);
    c.Add(std::string(stem) + "-rows-over-frame", lying);
  }
  // A JPEG 2000 stream with a bad SIZ marker: the first fragment's codestream starts FF 4F FF 51.
  Bytes j2k = MakeValid(scratch, TransferSyntax::kJpeg2000Lossless);
  for (size_t i = 0; i + 4 < j2k.size(); ++i) {
    if (j2k[i] == 0xFF && j2k[i + 1] == 0x4F && j2k[i + 2] == 0xFF && j2k[i + 3] == 0x51) {
      Bytes bad = j2k;
      for (size_t k = i + 6; k < i + 22 && k < bad.size(); ++k) bad[k] = 0xFF;  // sizes
      c.Add("j2k-bad-siz-header", bad);
      break;
    }
  }

  fs::remove(scratch);
  std::cout << "make_broken_corpus: wrote " << c.count() << " files to " << argv[1] << "\n";
  return 0;
}
