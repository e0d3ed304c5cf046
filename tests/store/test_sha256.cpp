// SHA-256 of the record chain (src/store/sha256.hpp) against published and library references.
#include <doctest/doctest.h>

#include <fstream>
#include <sstream>
#include <string>

#include "store/sha256.hpp"

using alphaledger::store::Sha256;
using alphaledger::store::sha256;
using alphaledger::store::to_hex;

// NIST, "Cryptographic Standards and Guidelines: Examples with Intermediate Values", SHA-256
// (the FIPS 180-2 Appendix B.1 and B.2 one- and two-block messages); digests also reproduced
// with Python 3.11 hashlib.sha256 (OpenSSL 3.0) on this machine.
TEST_CASE("Sha256: NIST example messages") {
  CHECK(to_hex(sha256("abc")) == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  CHECK(to_hex(sha256("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq")) ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  // FIPS 180-2 Appendix B.3: one million repetitions of 'a'.
  CHECK(to_hex(sha256(std::string(1000000, 'a'))) ==
        "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

// Python 3.11 hashlib.sha256: the empty message and the 896-bit NIST SHA-384/512 example message
// "abcdefghbcdefghi...nopqrstu" (chosen because it spans two blocks with a long tail).
TEST_CASE("Sha256: empty and 112-byte messages (hashlib)") {
  CHECK(to_hex(sha256("")) == "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  CHECK(to_hex(sha256(
            "abcdefghbcdefghicdefghijdefghijkefghijklfghijklmghijklmnhijklmnoijklmnopjklmnopqklmnopqrlmnopqrs"
            "mnopqrstnopqrstu")) == "cf5b16a778af8380036ce59e7b0492370b249b11e8f07a51afac45037afee9d1");
}

// tests/data/sha256_vectors.txt, written by tests/data/make_sha256_vectors.py with Python 3.11.2
// hashlib (OpenSSL 3.0.19): every length 0..300 crosses the padding boundaries of FIPS 180-4
// 5.1.1 (55, 56, 63, 64, 119, 120 ... bytes). Also checks that feeding the bytes in pieces
// gives the same digest as one update.
TEST_CASE("Sha256: every length 0..300 against hashlib, whole and in pieces") {
  std::ifstream in(std::string(ALPHALEDGER_TEST_DATA) + "/sha256_vectors.txt");
  REQUIRE(in.good());
  std::string line;
  int checked = 0;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    std::istringstream fields(line);
    std::size_t n = 0;
    std::string pattern, expected;
    fields >> n >> pattern >> expected;
    std::string message(n, '\0');
    for (std::size_t i = 0; i < n; ++i) {
      message[i] = pattern == "a" ? 'a' : static_cast<char>((i * 7 + 3) % 256);
    }
    CAPTURE(n);
    CHECK(to_hex(sha256(message)) == expected);
    if (n <= 300) {
      Sha256 pieces;
      for (std::size_t i = 0; i < n; i += 13) pieces.update(std::string_view(message).substr(i, 13));
      CHECK(to_hex(pieces.finish()) == expected);
    }
    ++checked;
  }
  CHECK(checked == 302);
}

// The CPU path (x86 SHA extensions, when this machine has them) against the portable code of
// FIPS 180-4 on messages of every length up to 9 blocks, whole and in uneven pieces; the NIST
// vectors above already pin whichever path sha256() takes. Reference: the portable code itself.
TEST_CASE("Sha256: the CPU path and the portable code agree on every length") {
  MESSAGE("sha256 uses the CPU's SHA instructions: " << alphaledger::store::sha256_uses_cpu_instructions());
  std::string msg;
  std::uint32_t x = 12345;
  for (std::size_t n = 0; n <= 9 * 64 + 1; ++n) {
    CAPTURE(n);
    const auto whole = sha256(msg);
    CHECK(whole == alphaledger::store::sha256_portable(msg));
    Sha256 pieces;
    for (std::size_t at = 0; at < msg.size(); at += 1 + at % 97)
      pieces.update(std::string_view(msg).substr(at, 1 + at % 97));
    CHECK(pieces.finish() == whole);
    x = x * 1103515245u + 12345u;  // any byte values will do
    msg.push_back(static_cast<char>(x >> 16));
  }
}
