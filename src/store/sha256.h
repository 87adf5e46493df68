// SHA-256 (FIPS 180-4) and HMAC-SHA256 (RFC 2104), used for the keyed hashes of identifiers
// and for staff pseudonyms. Pure functions, thread-safe. Internal to the store layer.
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

namespace beamtrim::store_internal {

using Digest = std::array<uint8_t, 32>;

// Incremental SHA-256.
class Sha256 {
 public:
  Sha256();
  void Update(const void* data, size_t size);
  void Update(std::string_view text) { Update(text.data(), text.size()); }
  Digest Finish();

 private:
  void Block(const uint8_t* block);
  std::array<uint32_t, 8> state_;
  std::array<uint8_t, 64> buffer_{};
  size_t buffered_ = 0;
  uint64_t total_bytes_ = 0;
};

Digest Sha256Of(std::string_view data);
Digest HmacSha256(std::string_view key, std::string_view message);
std::string ToHex(const uint8_t* data, size_t size);
inline std::string ToHex(const Digest& d) { return ToHex(d.data(), d.size()); }

}  // namespace beamtrim::store_internal
