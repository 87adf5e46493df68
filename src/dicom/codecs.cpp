// Codec registration and the transfer syntax table shared by reader and writer.
#include <mutex>

#include <dcmtk/dcmdata/dcrleerg.h>
#include <dcmtk/dcmdata/dcrledrg.h>
#include <dcmtk/dcmjpeg/djdecode.h>
#include <dcmtk/dcmjpeg/djencode.h>
#include <dcmtk/dcmjpls/djdecode.h>
#include <dcmtk/dcmjpls/djencode.h>
#include <dcmtk/oflog/oflog.h>

#include "beamtrim/dicom_writer.h"
#include "dicom/dicom_internal.h"

namespace beamtrim {

void RegisterDicomCodecs() {
  // DCMTK's registries are global lists; registering twice, or while another thread
  // decodes, is not safe, so do it exactly once.
  static std::once_flag once;
  std::call_once(once, [] {
    // DCMTK logs parse problems to stderr; beamtrim reports them as Errors instead, so only
    // fatal messages remain visible (this is a process-wide DCMTK setting).
    OFLog::configure(OFLogger::FATAL_LOG_LEVEL);
    DcmRLEDecoderRegistration::registerCodecs();
    DJDecoderRegistration::registerCodecs();
    DJLSDecoderRegistration::registerCodecs();
    DcmRLEEncoderRegistration::registerCodecs();
    // Lossy JPEG of grey images: DCMTK scales the pixel min..max onto the JPEG sample range;
    // pUseModalityRescale makes it record that scaling as Rescale Slope/Intercept, so the
    // modality values survive (without it the offset is silently lost). UIDs stay as given.
    DJEncoderRegistration::registerCodecs(ECC_lossyYCbCr, EUC_never, OFFalse, 0, 0, 0, OFTrue,
                                          ESS_422, OFTrue, OFFalse, 0, 0, 0.0, 0.0, 0, 0, 0, 0,
                                          /*pUsePixelValues=*/OFTrue,
                                          /*pUseModalityRescale=*/OFTrue);
    DJLSEncoderRegistration::registerCodecs(0, 0, 0, 0, OFTrue, 0, OFTrue, EJLSUC_never);
  });
}

const char* TransferSyntaxName(TransferSyntax syntax) {
  switch (syntax) {
    case TransferSyntax::kImplicitLittle: return "implicit-little";
    case TransferSyntax::kExplicitLittle: return "explicit-little";
    case TransferSyntax::kExplicitBig: return "explicit-big";
    case TransferSyntax::kDeflated: return "deflated";
    case TransferSyntax::kRle: return "rle";
    case TransferSyntax::kJpegBaseline: return "jpeg-baseline";
    case TransferSyntax::kJpegExtended: return "jpeg-extended";
    case TransferSyntax::kJpegLossless: return "jpeg-lossless";
    case TransferSyntax::kJpegLsLossless: return "jpeg-ls-lossless";
    case TransferSyntax::kJpegLsNearLossless: return "jpeg-ls-near-lossless";
    case TransferSyntax::kJpeg2000Lossless: return "jpeg2000-lossless";
    case TransferSyntax::kJpeg2000: return "jpeg2000";
  }
  return "explicit-little";
}

// UIDs from DICOM PS3.6 Annex A (Registry of DICOM Unique Identifiers).
const char* TransferSyntaxUid(TransferSyntax syntax) {
  switch (syntax) {
    case TransferSyntax::kImplicitLittle: return "1.2.840.10008.1.2";
    case TransferSyntax::kExplicitLittle: return "1.2.840.10008.1.2.1";
    case TransferSyntax::kExplicitBig: return "1.2.840.10008.1.2.2";
    case TransferSyntax::kDeflated: return "1.2.840.10008.1.2.1.99";
    case TransferSyntax::kRle: return "1.2.840.10008.1.2.5";
    case TransferSyntax::kJpegBaseline: return "1.2.840.10008.1.2.4.50";
    case TransferSyntax::kJpegExtended: return "1.2.840.10008.1.2.4.51";
    case TransferSyntax::kJpegLossless: return "1.2.840.10008.1.2.4.70";
    case TransferSyntax::kJpegLsLossless: return "1.2.840.10008.1.2.4.80";
    case TransferSyntax::kJpegLsNearLossless: return "1.2.840.10008.1.2.4.81";
    case TransferSyntax::kJpeg2000Lossless: return "1.2.840.10008.1.2.4.90";
    case TransferSyntax::kJpeg2000: return "1.2.840.10008.1.2.4.91";
  }
  return "1.2.840.10008.1.2.1";
}

std::vector<TransferSyntax> AllTransferSyntaxes() {
  return {TransferSyntax::kImplicitLittle,   TransferSyntax::kExplicitLittle,
          TransferSyntax::kExplicitBig,      TransferSyntax::kDeflated,
          TransferSyntax::kRle,              TransferSyntax::kJpegBaseline,
          TransferSyntax::kJpegExtended,     TransferSyntax::kJpegLossless,
          TransferSyntax::kJpegLsLossless,   TransferSyntax::kJpegLsNearLossless,
          TransferSyntax::kJpeg2000Lossless, TransferSyntax::kJpeg2000};
}

}  // namespace beamtrim
