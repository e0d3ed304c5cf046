// What the ledger's encodings share (src/store/codec*.cpp; the declarations are in codec.hpp):
// the byte reader with hashes and the 16-bit-length text field. Internal to the store. codec.cpp
// holds the keys and the small values, codec_stream.cpp a stream's configuration, head and running
// tests, codec_chain.cpp the chain entries (decision records, events, looks, closing).
#pragma once

#include <cstring>
#include <string>
#include <string_view>

#include "core/bytes.hpp"
#include "store/sha256.hpp"

namespace alphaledger::store::codec_detail {

// bytes::Reader, and the 32 bytes of a hash.
struct Reader : bytes::Reader {
  Digest digest() {
    Digest d{};
    auto s = bytes(32);
    if (ok) std::memcpy(d.data(), s.data(), 32);
    return d;
  }
};

// u16 length, then the bytes.
inline void put_text16(std::string& out, std::string_view s) {
  bytes::put_u16(out, static_cast<std::uint16_t>(s.size()));
  out.append(s);
}

}  // namespace alphaledger::store::codec_detail
