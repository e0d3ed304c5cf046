// SHA-256 as specified in FIPS 180-4 (Secure Hash Standard, NIST, August 2015), section 6.2.
// Used for the ledger's record chain (docs/ledger-format.md). Internal to the store.
//
// Thread-safety: a Sha256 object is a value; distinct objects may be used from distinct threads.
#pragma once

#include <array>
#include <cstdint>
#include <string>
#include <string_view>

namespace alphaledger::store {

using Digest = std::array<std::uint8_t, 32>;

class Sha256 {
 public:
  Sha256();
  void update(std::string_view bytes);
  // Finishes the hash (FIPS 180-4 5.1.1 padding). The object must not be updated afterwards.
  Digest finish();

 private:
  // Processes `blocks` whole 64-byte blocks: with the CPU's SHA instructions when it has them,
  // otherwise the portable code of FIPS 180-4 6.2.2. Both give the same digest.
  void compress(const std::uint8_t* data, std::size_t blocks);

  std::array<std::uint32_t, 8> h_;
  std::array<std::uint8_t, 64> buffer_{};
  std::size_t buffered_ = 0;
  std::uint64_t total_bytes_ = 0;
};

Digest sha256(std::string_view bytes);
// For tests: the digest computed with the portable code only, and whether sha256() uses the CPU's
// SHA instructions on this machine (x86-64 SHA extensions).
Digest sha256_portable(std::string_view bytes);
bool sha256_uses_cpu_instructions();
std::string to_hex(const Digest& d);
std::string_view as_bytes(const Digest& d);

}  // namespace alphaledger::store
