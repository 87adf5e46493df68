// Internal entry of the scan engine shared by ScanFiles and Scan.
#pragma once

#include "beamtrim/scan.h"

namespace beamtrim::store_internal {

// As ScanFiles; `problems` (inputs that could not be walked) go into the summary before the
// progress sees it.
Result<ScanSummary> RunScan(const std::vector<std::filesystem::path>& files,
                            std::vector<Error> problems, Store& store,
                            const ImageMeasurer& measurer, const ScanOptions& options,
                            ScanProgress& progress, const std::atomic<bool>* stop);

}  // namespace beamtrim::store_internal
