// Fixed-width little-endian coding of unsigned integers and doubles, shared by every binary
// format the project writes (rule state, ledger records, the seal file). Internal to the library:
// the core and the store include it as "core/bytes.hpp"; it is not installed.
//
// Example:
//   std::string out;
//   alphaledger::bytes::put_u64(out, 42);
//   assert(alphaledger::bytes::get_u64(out) == 42);
#pragma once

#include <bit>
#include <cstdint>
#include <string>
#include <string_view>

namespace alphaledger::bytes {

// Appends the low `Width` bytes of `v`, lowest first.
template <int Width>
void put_le(std::string& out, std::uint64_t v) {
  static_assert(Width >= 1 && Width <= 8);
  for (int i = 0; i < Width; ++i) out.push_back(static_cast<char>((v >> (8 * i)) & 0xff));
}

// Reads `Width` bytes from the front of `in`, lowest first. `in` must hold at least Width bytes.
template <int Width>
std::uint64_t get_le(std::string_view in) {
  static_assert(Width >= 1 && Width <= 8);
  std::uint64_t v = 0;
  for (int i = Width - 1; i >= 0; --i) v = (v << 8) | static_cast<unsigned char>(in[static_cast<std::size_t>(i)]);
  return v;
}

inline void put_u8(std::string& out, std::uint8_t v) { put_le<1>(out, v); }
inline void put_u16(std::string& out, std::uint16_t v) { put_le<2>(out, v); }
inline void put_u32(std::string& out, std::uint32_t v) { put_le<4>(out, v); }
inline void put_u64(std::string& out, std::uint64_t v) { put_le<8>(out, v); }
// A double as the 8 bytes of its IEEE 754 bit pattern (bit-exact round trip, NaN payloads too).
inline void put_f64(std::string& out, double v) { put_u64(out, std::bit_cast<std::uint64_t>(v)); }

inline std::uint64_t get_u64(std::string_view in) { return get_le<8>(in); }
inline double get_f64(std::string_view in) { return std::bit_cast<double>(get_u64(in)); }

// Reads fixed-width little-endian values from the front of `in`; `ok` turns false on the first
// short read, after which every read gives 0 (or an empty view) and `in` is empty. Construct as
// Reader{bytes}.
struct Reader {
  std::string_view in;
  bool ok = true;

  std::uint64_t uint(int width) {
    if (in.size() < static_cast<std::size_t>(width)) return fail();
    std::uint64_t v = 0;
    for (int i = 0; i < width; ++i) v |= std::uint64_t{static_cast<unsigned char>(in[static_cast<std::size_t>(i)])} << (8 * i);
    in.remove_prefix(static_cast<std::size_t>(width));
    return v;
  }
  std::uint8_t u8() { return static_cast<std::uint8_t>(uint(1)); }
  std::uint16_t u16() { return static_cast<std::uint16_t>(uint(2)); }
  std::uint32_t u32() { return static_cast<std::uint32_t>(uint(4)); }
  std::uint64_t u64() { return uint(8); }
  double f64() { return std::bit_cast<double>(u64()); }
  // The next n bytes as a view into the input.
  std::string_view bytes(std::size_t n) {
    if (in.size() < n) {
      fail();
      return {};
    }
    auto s = in.substr(0, n);
    in.remove_prefix(n);
    return s;
  }
  // Whether n items of `each` bytes can still be read (checks a stored count before reserving).
  bool room_for(std::uint64_t n, std::size_t each) const { return n <= in.size() / each; }
  std::uint64_t fail() {
    ok = false;
    in = {};
    return 0;
  }
};

}  // namespace alphaledger::bytes
