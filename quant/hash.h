// hash.h — SHA-256 content hashes and the short hex ids derived from them (model ids).
// SHA-256 as specified in FIPS 180-4 (NIST, 2015), section 6.2.
// Usage: Sha256 h; h.update(p, n); ...; std::string id = short_id(h.finish());
#pragma once
#include <array>
#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

namespace tessera::quant {

using Digest = std::array<std::uint8_t, 32>;

// Streaming SHA-256: feed bytes in any pieces, then finish() once.
class Sha256 {
 public:
  Sha256();
  void update(const void* data, std::size_t n);
  void update(std::string_view s) { update(s.data(), s.size()); }
  Digest finish();   // pads and returns the digest; the object must not be used afterwards

 private:
  void compress(const std::uint8_t* block);   // one 64-byte block
  std::array<std::uint32_t, 8> h_;
  std::array<std::uint8_t, 64> buf_{};
  std::size_t buf_len_ = 0;
  std::uint64_t total_ = 0;                    // bytes seen
};

std::string to_hex(const Digest& d);                       // 64 lowercase hex digits
std::string sha256_hex(const void* data, std::size_t n);   // one-shot
// The first `hex_digits` (1..64) hex digits of the digest: 16 digits = 64 bits, enough to
// tell models apart (not a security property).
std::string short_id(const Digest& d, int hex_digits = 16);

}  // namespace tessera::quant
