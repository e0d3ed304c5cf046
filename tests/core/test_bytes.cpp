// Little-endian coding (src/core/bytes.hpp): byte order and round trips. The expected bytes are
// the definition of little-endian order (lowest byte first), common practice, no source.
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <string>

#include "core/bytes.hpp"

namespace bytes = alphaledger::bytes;

TEST_CASE("bytes: integers are written lowest byte first") {
  std::string out;
  bytes::put_u64(out, 0x0102030405060708ull);
  CHECK(out == std::string("\x08\x07\x06\x05\x04\x03\x02\x01", 8));
  out.clear();
  bytes::put_u16(out, 0xA1B2);
  bytes::put_u32(out, 0x01020304u);
  bytes::put_u8(out, 0xFF);
  CHECK(out == std::string("\xB2\xA1\x04\x03\x02\x01\xFF", 7));
}

TEST_CASE("bytes: u64 and f64 round trip bit for bit") {
  for (std::uint64_t v : {0ull, 1ull, 0x8000000000000000ull, ~0ull, 0x00FF00FF00FF00FFull}) {
    std::string out;
    bytes::put_u64(out, v);
    CHECK(out.size() == 8);
    CHECK(bytes::get_u64(out) == v);
  }
  for (double v : {0.0, -0.0, 0.05, 1e-300, std::numeric_limits<double>::infinity()}) {
    std::string out;
    bytes::put_f64(out, v);
    const double back = bytes::get_f64(out);
    CHECK(std::bit_cast<std::uint64_t>(back) == std::bit_cast<std::uint64_t>(v));
  }
  std::string out;
  bytes::put_f64(out, std::nan(""));
  CHECK(std::isnan(bytes::get_f64(out)));
}

TEST_CASE("bytes: get_u64 reads only the first eight bytes") {
  std::string out;
  bytes::put_u64(out, 7);
  out += "tail";
  CHECK(bytes::get_u64(out) == 7);
}

TEST_CASE("bytes: Reader reads in order and fails safely on a short input") {
  std::string out;
  bytes::put_u8(out, 0xab);
  bytes::put_u16(out, 0x1234);
  bytes::put_u32(out, 0xdeadbeef);
  bytes::put_f64(out, 0.05);
  out += "xyz";
  // Little-endian by definition: the u16 0x1234 is stored as 34 12.
  CHECK(out[1] == '\x34');
  CHECK(out[2] == '\x12');
  bytes::Reader r{out};
  CHECK(r.u8() == 0xab);
  CHECK(r.u16() == 0x1234);
  CHECK(r.u32() == 0xdeadbeefu);
  CHECK(r.f64() == 0.05);
  CHECK(r.room_for(3, 1));
  CHECK_FALSE(r.room_for(2, 2));
  CHECK(r.bytes(3) == "xyz");
  CHECK(r.ok);
  CHECK(r.u64() == 0);  // nothing left: a short read
  CHECK_FALSE(r.ok);
  CHECK(r.bytes(1).empty());
  CHECK(r.in.empty());
}
