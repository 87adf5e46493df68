#include "fuzz_common.h"

#include <unistd.h>

#include <fstream>
#include <string>

namespace beamtrim::fuzz {

std::filesystem::path WriteScratch(const uint8_t* data, size_t size) {
  static const std::filesystem::path path = [] {
    std::filesystem::path dir = std::filesystem::exists("/dev/shm") ? "/dev/shm"
                                                                    : std::filesystem::temp_directory_path();
    return dir / ("beamtrim-fuzz-" + std::to_string(getpid()) + ".dcm");
  }();
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(reinterpret_cast<const char*>(data), static_cast<std::streamsize>(size));
  return path;
}

}  // namespace beamtrim::fuzz
