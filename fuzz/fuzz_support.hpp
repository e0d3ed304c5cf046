// Shared by the fuzz targets: an invariant check that stops the run with a message (libFuzzer
// records the input that broke it), and helpers over the fuzzer's bytes.
#pragma once

#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <string_view>

#include "alphaledger/test_log.hpp"

namespace alphaledger::fuzz {

inline void require(bool ok, const char* what) {
  if (!ok) {
    std::fprintf(stderr, "invariant broken: %s\n", what);
    std::abort();
  }
}

inline std::string_view as_text(const std::uint8_t* data, std::size_t size) {
  return {reinterpret_cast<const char*>(data), size};
}

// Every message that may reach a user: bounded (no input is echoed whole) and valid UTF-8 (it is
// written into JSON answers). 4096 bytes is far above any message built from excerpts.
inline void check_message(const std::string& message) {
  require(!message.empty(), "an error without a message");
  require(message.size() < 4096, "a message longer than 4096 bytes (a value echoed whole?)");
  require(excerpt(message, message.size()) == message,
          "a message with a control character or bytes that are not UTF-8");
}

}  // namespace alphaledger::fuzz
