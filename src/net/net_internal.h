// Internals of the net layer shared by the Storage SCP and the Q/R SCU: the SOP classes and
// transfer syntaxes beamtrim negotiates, and the atomic writer of a received data set.
// DCMTK types stay in here; the public header (beamtrim/network.h) has none.
#pragma once

#include <string>
#include <vector>

#include <dcmtk/config/osconfig.h>
#include <dcmtk/dcmdata/dcdatset.h>
#include <dcmtk/dcmdata/dcxfer.h>
#include <dcmtk/ofstd/oflist.h>
#include <dcmtk/ofstd/ofstring.h>

#include "beamtrim/network.h"

namespace beamtrim::net {

// DX for presentation, DX for processing, CR (PS3.4 Annex B.5).
const std::vector<std::string>& RadiographStorageClasses();

// Transfer syntaxes accepted for storage, in order of preference when a peer offers several
// in one presentation context: uncompressed and lossless first, lossy last, so that beamtrim
// never makes a sender compress lossily. Received objects are kept in whatever syntax came.
OFList<OFString> AcceptedTransferSyntaxes();
// Same list without the uncompressed ones (each is proposed in a context of its own by pull).
std::vector<std::string> CompressedTransferSyntaxes();
OFList<OFString> UncompressedTransferSyntaxes();

// Writes `dataset` (received in `xfer`, kept as is) to spool.TempPath(uid) and commits it to
// spool.ReceivedPath(uid), where uid is the data set's own SOP Instance UID (CommitSpoolFile:
// an existing file is never replaced). A data set without a SOP Instance UID is refused. On
// failure nothing is left in received/ and the temp file is removed.
Result<CommitResult> WriteToSpool(const Spool& spool, DcmDataset& dataset,
                                  E_TransferSyntax xfer);

// sink.consume(file), with any exception turned into an error naming the file: one bad object
// must never end the listener or a pull.
Status ConsumeGuarded(const SpoolSink& sink, const std::filesystem::path& file);

// "DCMTK condition text" for error messages.
std::string ConditionText(const OFCondition& condition);

// Valid AE title: 1..16 characters of the default repertoire, no backslash or control
// characters, not all spaces (PS3.5 6.2, AE value representation).
bool IsValidAeTitle(const std::string& title);

}  // namespace beamtrim::net
