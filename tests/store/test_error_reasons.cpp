// The store's errors say what happened and carry a reason and subject for front ends; they never
// tell the reader which command to run (that is the command line's job, src/cli/cli_errors.cpp).
// Expected texts are our own contract (docs/errors.md; common practice, no source).
#include <doctest/doctest.h>

#include <memory>
#include <string>

#include "alphaledger/ledger.hpp"
#include "alphaledger/store.hpp"

using namespace alphaledger;

namespace {

std::unique_ptr<Ledger> memory_ledger() {
  auto ledger = Ledger::open(std::make_unique<MemoryStore>(), [] { return std::int64_t{1700000000000}; });
  REQUIRE(ledger.ok());
  return std::move(*ledger);
}

}  // namespace

TEST_CASE("ErrorReasons: an unknown stream is not_found with reason and subject, and no command") {
  auto ledger = memory_ledger();
  const auto r = ledger->status("checkuot");
  REQUIRE_FALSE(r.ok());
  CHECK(r.error().kind == ErrorKind::kNotFound);
  CHECK(code_word(r.error()) == "unknown_stream");
  CHECK(r.error().reason == "unknown_stream");
  CHECK(r.error().subject == "checkuot");
  CHECK(r.error().message.find("no stream named 'checkuot'") != std::string::npos);
  CHECK(r.error().message.find("alphaledger ") == std::string::npos);
}

TEST_CASE("ErrorReasons: a closed stream refuses a decision as a conflict, reason closed_stream") {
  auto ledger = memory_ledger();
  REQUIRE(ledger->create_stream("s", *resolve_config({.rule = "lond"})).ok());
  REQUIRE(ledger->close_stream("s").ok());
  const auto d = ledger->decide("s", "a", 0.01);
  REQUIRE_FALSE(d.ok());
  CHECK(d.error().kind == ErrorKind::kConflict);
  CHECK(code_word(d.error()) == "conflict");
  CHECK(d.error().reason == "closed_stream");
  CHECK(d.error().subject == "s");
  CHECK(d.error().message.find("alphaledger ") == std::string::npos);
}
