// Shared by the fuzz targets: the reader takes a path, so each input is written to a private
// file on a memory-backed folder first.
#pragma once

#include <cstddef>
#include <cstdint>
#include <filesystem>

namespace beamtrim::fuzz {

// Writes the bytes to this process's scratch file and returns its path.
std::filesystem::path WriteScratch(const uint8_t* data, size_t size);

}  // namespace beamtrim::fuzz
