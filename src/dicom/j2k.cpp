// OpenJPEG adapter: JPEG 2000 decode/encode in memory. DCMTK has no JPEG 2000 codec, so the
// reader hands the first frame's fragments here and the writer wraps the codestream itself.
#include <algorithm>
#include <cmath>
#include <cstring>
#include <memory>

#include <openjpeg.h>

#include "dicom/dicom_internal.h"

namespace beamtrim::dicom_internal {
namespace {

// OpenJPEG reports through callbacks; keep the first error and warning for the reason.
struct Messages {
  std::string error;
  std::string warning;
};

std::string Trimmed(const char* msg) {
  std::string s = msg;
  while (!s.empty() && (s.back() == '\n' || s.back() == ' ')) s.pop_back();
  return s;
}
void OnError(const char* msg, void* data) {
  auto* m = static_cast<Messages*>(data);
  if (m->error.empty()) m->error = Trimmed(msg);
}
void OnWarning(const char* msg, void* data) {
  auto* m = static_cast<Messages*>(data);
  if (m->warning.empty()) m->warning = Trimmed(msg);
}
void OnQuiet(const char*, void*) {}

struct ReadBuffer {
  const uint8_t* data;
  size_t size;
  size_t pos;
};

OPJ_SIZE_T ReadFn(void* out, OPJ_SIZE_T n, void* user) {
  auto* b = static_cast<ReadBuffer*>(user);
  if (b->pos >= b->size) return static_cast<OPJ_SIZE_T>(-1);  // end of stream, per openjpeg.h
  size_t take = std::min<size_t>(n, b->size - b->pos);
  std::memcpy(out, b->data + b->pos, take);
  b->pos += take;
  return take;
}
OPJ_OFF_T SkipReadFn(OPJ_OFF_T n, void* user) {
  auto* b = static_cast<ReadBuffer*>(user);
  if (n < 0 || static_cast<size_t>(n) > b->size - b->pos) return -1;
  b->pos += static_cast<size_t>(n);
  return n;
}
OPJ_BOOL SeekReadFn(OPJ_OFF_T n, void* user) {
  auto* b = static_cast<ReadBuffer*>(user);
  if (n < 0 || static_cast<size_t>(n) > b->size) return OPJ_FALSE;
  b->pos = static_cast<size_t>(n);
  return OPJ_TRUE;
}

struct WriteBuffer {
  std::vector<uint8_t> bytes;
  size_t pos = 0;
};

OPJ_SIZE_T WriteFn(void* in, OPJ_SIZE_T n, void* user) {
  auto* b = static_cast<WriteBuffer*>(user);
  if (b->pos + n > b->bytes.size()) b->bytes.resize(b->pos + n);
  std::memcpy(b->bytes.data() + b->pos, in, n);
  b->pos += n;
  return n;
}
OPJ_OFF_T SkipWriteFn(OPJ_OFF_T n, void* user) {
  auto* b = static_cast<WriteBuffer*>(user);
  if (n < 0) return -1;
  b->pos += static_cast<size_t>(n);
  if (b->pos > b->bytes.size()) b->bytes.resize(b->pos);
  return n;
}
OPJ_BOOL SeekWriteFn(OPJ_OFF_T n, void* user) {
  auto* b = static_cast<WriteBuffer*>(user);
  if (n < 0) return OPJ_FALSE;
  b->pos = static_cast<size_t>(n);
  if (b->pos > b->bytes.size()) b->bytes.resize(b->pos);
  return OPJ_TRUE;
}

struct CodecDeleter {
  void operator()(opj_codec_t* c) const { opj_destroy_codec(c); }
};
struct StreamDeleter {
  void operator()(opj_stream_t* s) const { opj_stream_destroy(s); }
};
struct ImageDeleter {
  void operator()(opj_image_t* i) const { opj_image_destroy(i); }
};
using CodecPtr = std::unique_ptr<opj_codec_t, CodecDeleter>;
using StreamPtr = std::unique_ptr<opj_stream_t, StreamDeleter>;
using ImagePtr = std::unique_ptr<opj_image_t, ImageDeleter>;

// ISO/IEC 15444-1: a codestream starts with SOC+SIZ (FF4F FF51); a JP2 file with the
// 12-byte signature box (0000000C 6A502020 0D0A870A).
std::optional<OPJ_CODEC_FORMAT> DetectFormat(const uint8_t* d, size_t n) {
  static const uint8_t kJp2[] = {0, 0, 0, 0x0C, 0x6A, 0x50, 0x20, 0x20, 0x0D, 0x0A, 0x87, 0x0A};
  if (n >= 4 && d[0] == 0xFF && d[1] == 0x4F && d[2] == 0xFF && d[3] == 0x51) return OPJ_CODEC_J2K;
  if (n >= sizeof kJp2 && std::memcmp(d, kJp2, sizeof kJp2) == 0) return OPJ_CODEC_JP2;
  return std::nullopt;
}

// OpenJPEG's first error, else its first warning, explains a failure best.
std::string Reason(const Messages& m, const char* fallback) {
  const std::string& detail = m.error.empty() ? m.warning : m.error;
  return detail.empty() ? std::string(fallback)
                        : std::string(fallback) + " (OpenJPEG: " + detail + ")";
}

}  // namespace

Result<J2kImage> DecodeJ2k(const uint8_t* data, size_t size, int64_t max_pixels) {
  auto kind = ErrorKind::kMalformed;
  std::optional<OPJ_CODEC_FORMAT> format = DetectFormat(data, size);
  if (!format) return MakeError(kind, "", "JPEG 2000 data has neither a J2K nor a JP2 signature");
  CodecPtr codec(opj_create_decompress(*format));
  Messages msgs;
  opj_set_error_handler(codec.get(), OnError, &msgs);
  opj_set_warning_handler(codec.get(), OnWarning, &msgs);
  opj_set_info_handler(codec.get(), OnQuiet, &msgs);
  opj_dparameters_t params;
  opj_set_default_decoder_parameters(&params);
  if (!opj_setup_decoder(codec.get(), &params)) return MakeError(kind, "", Reason(msgs, "JPEG 2000 decoder setup failed"));
  // A truncated codestream must be an error, not a partially decoded image.
  opj_decoder_set_strict_mode(codec.get(), OPJ_TRUE);

  ReadBuffer buf{data, size, 0};
  StreamPtr stream(opj_stream_create(64 * 1024, OPJ_TRUE));
  opj_stream_set_user_data(stream.get(), &buf, nullptr);
  opj_stream_set_user_data_length(stream.get(), size);
  opj_stream_set_read_function(stream.get(), ReadFn);
  opj_stream_set_skip_function(stream.get(), SkipReadFn);
  opj_stream_set_seek_function(stream.get(), SeekReadFn);

  opj_image_t* raw = nullptr;
  if (!opj_read_header(stream.get(), codec.get(), &raw)) {
    ImagePtr guard(raw);
    return MakeError(kind, "", Reason(msgs, "JPEG 2000 header unreadable"));
  }
  ImagePtr image(raw);
  int64_t w = static_cast<int64_t>(image->x1) - image->x0;
  int64_t h = static_cast<int64_t>(image->y1) - image->y0;
  if (w <= 0 || h <= 0 || image->numcomps == 0) {
    return MakeError(kind, "", "JPEG 2000 header declares an empty image");
  }
  if (w * h > max_pixels) {
    return MakeError(kind, "", "JPEG 2000 header declares " + std::to_string(w) + " x " +
                                   std::to_string(h) + " pixels, above the size limit");
  }
  if (!opj_decode(codec.get(), stream.get(), image.get()) ||
      !opj_end_decompress(codec.get(), stream.get())) {
    return MakeError(kind, "", Reason(msgs, "JPEG 2000 codestream could not be decoded"));
  }
  const opj_image_comp_t& c = image->comps[0];
  if (c.data == nullptr || c.w != static_cast<OPJ_UINT32>(w) || c.h != static_cast<OPJ_UINT32>(h)) {
    return MakeError(kind, "", "JPEG 2000 component is subsampled or missing");
  }
  J2kImage out;
  out.width = static_cast<int>(w);
  out.height = static_cast<int>(h);
  out.components = static_cast<int>(image->numcomps);
  out.precision = static_cast<int>(c.prec);
  out.is_signed = c.sgnd != 0;
  static_assert(sizeof(OPJ_INT32) == sizeof(int32_t));
  out.values = reinterpret_cast<const int32_t*>(c.data);
  // The codec (and its tile buffers) is destroyed on return; the image lives on in `out`.
  out.owner = std::shared_ptr<const void>(image.release(), [](const void* p) {
    opj_image_destroy(static_cast<opj_image_t*>(const_cast<void*>(p)));
  });
  return out;
}

Result<std::vector<uint8_t>> EncodeJ2k(const std::vector<int32_t>& values, int width,
                                       int height, int precision, bool is_signed,
                                       bool lossless, double compression_ratio) {
  auto kind = ErrorKind::kInternal;
  if (width <= 0 || height <= 0 || values.size() != static_cast<size_t>(width) * height) {
    return MakeError(ErrorKind::kInvalidInput, "", "JPEG 2000 encoder got an empty image");
  }
  opj_image_cmptparm_t cp;
  std::memset(&cp, 0, sizeof cp);
  cp.dx = cp.dy = 1;
  cp.w = static_cast<OPJ_UINT32>(width);
  cp.h = static_cast<OPJ_UINT32>(height);
  cp.prec = static_cast<OPJ_UINT32>(precision);
  cp.sgnd = is_signed ? 1 : 0;
  ImagePtr image(opj_image_create(1, &cp, OPJ_CLRSPC_GRAY));
  if (!image) return MakeError(kind, "", "JPEG 2000 image allocation failed");
  image->x1 = cp.w;
  image->y1 = cp.h;
  std::copy(values.begin(), values.end(), image->comps[0].data);

  opj_cparameters_t params;
  opj_set_default_encoder_parameters(&params);
  params.tcp_numlayers = 1;
  params.cp_disto_alloc = 1;
  params.irreversible = lossless ? 0 : 1;
  params.tcp_rates[0] = lossless ? 0.0f : static_cast<float>(std::max(1.0, compression_ratio));
  // Each resolution level halves the image; OpenJPEG needs 2^(levels-1) <= min(w, h).
  int levels = 1;
  while (levels < 6 && (1 << levels) <= std::min(width, height)) ++levels;
  params.numresolution = levels;

  CodecPtr codec(opj_create_compress(OPJ_CODEC_J2K));
  Messages msgs;
  opj_set_error_handler(codec.get(), OnError, &msgs);
  opj_set_warning_handler(codec.get(), OnWarning, &msgs);
  opj_set_info_handler(codec.get(), OnQuiet, &msgs);
  if (!opj_setup_encoder(codec.get(), &params, image.get())) {
    return MakeError(kind, "", Reason(msgs, "JPEG 2000 encoder setup failed"));
  }
  WriteBuffer out;
  StreamPtr stream(opj_stream_create(64 * 1024, OPJ_FALSE));
  opj_stream_set_user_data(stream.get(), &out, nullptr);
  opj_stream_set_write_function(stream.get(), WriteFn);
  opj_stream_set_skip_function(stream.get(), SkipWriteFn);
  opj_stream_set_seek_function(stream.get(), SeekWriteFn);
  if (!opj_start_compress(codec.get(), image.get(), stream.get()) ||
      !opj_encode(codec.get(), stream.get()) || !opj_end_compress(codec.get(), stream.get())) {
    return MakeError(kind, "", Reason(msgs, "JPEG 2000 encoding failed"));
  }
  stream.reset();  // flushes buffered bytes into `out`
  return std::move(out.bytes);
}

}  // namespace beamtrim::dicom_internal
