// alphaledger copy STREAM --to LOCATION (docs/ledger.md "Moving a stream"): the copy's history is
// the source's, byte for byte, and verifies; a target that has the stream, a bad name and an
// unknown stream are refused with nothing changed; with a PostgreSQL server, a round trip
// folder -> PostgreSQL -> folder.
#include <doctest/doctest.h>

#include <filesystem>
#include <nlohmann/json.hpp>

#include "support/pg.hpp"
#include "support/process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

using alphaledger::test_support::PgDatabase;
using alphaledger::test_support::run_alphaledger;
using alphaledger::test_support::TempDir;

namespace {

std::vector<std::string> with_ledger(const std::string& ledger, std::vector<std::string> args) {
  args.insert(args.begin(), {"--ledger", ledger});
  return args;
}

// A stream with decisions, a launch, a look and an abandon (every key family), and a neighbour.
void make_source(const std::string& db) {
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s", "--rule", "saffron"})).exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"new", "s.b", "--rule", "lord++"})).exit_code == 0);
  std::string lines;
  for (int i = 0; i < 30; ++i) {
    lines += alphaledger::test_support::concat(R"({"id":"t)", std::to_string(i), R"(","p_value":)",
                                               std::to_string((i * 37 % 101) / 1000.0), "}\n");
  }
  lines += R"({"event":"launch","id":"w"})"
           "\n";
  lines +=
      R"({"event":"look","id":"w","control":{"n":8000,"conversions":400},"treatment":{"n":8000,"conversions":430},"mixture_sd":0.005})"
      "\n";
  lines += R"({"event":"launch","id":"gone"})"
           "\n";
  lines += R"({"event":"abandon","id":"gone"})"
           "\n";
  lines += R"({"event":"launch","id":"still"})"
           "\n";
  auto piped = run_alphaledger(with_ledger(db, {"pipe", "s"}), lines);
  INFO(piped.out << piped.err);
  REQUIRE(piped.exit_code == 0);
  REQUIRE(run_alphaledger(with_ledger(db, {"pipe", "s.b"}), R"({"id":"x","p_value":0.2})"
                                                            "\n")
              .exit_code == 0);
}

// What a reader sees of stream s: history, the running tests, status without times.
std::string view_of(const std::string& location, const std::string& stream) {
  std::string out;
  for (std::vector<std::string> args :
       {std::vector<std::string>{"history", stream, "--format", "jsonl"},
        std::vector<std::string>{"running", stream}, std::vector<std::string>{"verify", stream}}) {
    auto r = run_alphaledger(with_ledger(location, args));
    INFO(args[0] << ": " << r.err);
    CHECK(r.exit_code == 0);
    out += r.out;
  }
  return out;
}

}  // namespace

TEST_CASE("CopyCli: folder to folder, the copy reads and verifies as the source; only that stream") {
  TempDir dir;
  const std::string from = dir.sub("from"), to = dir.sub("to");
  make_source(from);
  auto copied = run_alphaledger(with_ledger(from, {"copy", "s", "--to", to}));
  INFO(copied.err);
  REQUIRE(copied.exit_code == 0);
  CHECK(copied.out.find(alphaledger::test_support::concat("copied stream s from ", from, " to ", to,
                                                          ": 35 records")) == 0);
  CHECK(copied.out.find("verify ok: 35 steps, chain hash ") != std::string::npos);
  CHECK(view_of(to, "s") == view_of(from, "s"));
  auto streams = run_alphaledger(with_ledger(to, {"streams"}));
  CHECK(streams.out.find("s.b") == std::string::npos);

  auto json = run_alphaledger(with_ledger(from, {"--json", "copy", "s.b", "--to", to}));
  REQUIRE(json.exit_code == 0);
  auto j = nlohmann::json::parse(json.out);
  CHECK(j["stream"] == "s.b");
  CHECK(j["records"] == 1);
  CHECK(j["verified"] == true);
  CHECK(j["steps"] == 1);
  CHECK(j["chain_hash"].get<std::string>().size() == 64);
}

TEST_CASE("CopyCli: refused when the target has the stream, for a bad name, an unknown stream") {
  TempDir dir;
  const std::string from = dir.sub("from"), to = dir.sub("to");
  make_source(from);
  const std::string source_before = view_of(from, "s");
  REQUIRE(run_alphaledger(with_ledger(to, {"new", "s", "--rule", "lord++"})).exit_code == 0);
  const std::string before = view_of(to, "s");

  auto exists = run_alphaledger(with_ledger(from, {"copy", "s", "--to", to}));
  CHECK(exists.exit_code == 3);
  CHECK(exists.err.find("already has a stream named 's'") != std::string::npos);
  CHECK(exists.out.empty());
  CHECK(view_of(to, "s") == before);

  auto bad = run_alphaledger(with_ledger(from, {"copy", "a/b", "--to", to}));
  CHECK(bad.exit_code == 2);
  auto unknown = run_alphaledger(with_ledger(from, {"copy", "nope", "--to", dir.sub("new")}));
  CHECK(unknown.exit_code == 3);
  CHECK(unknown.err.find("no stream named 'nope'") != std::string::npos);
  CHECK_FALSE(std::filesystem::exists(dir.sub("new")));  // nothing created for a refused copy
  auto no_ledger = run_alphaledger(with_ledger(dir.sub("absent"), {"copy", "s", "--to", dir.sub("new")}));
  CHECK(no_ledger.exit_code == 3);
  CHECK(no_ledger.err.find("no ledger at") != std::string::npos);
  CHECK(view_of(from, "s") == source_before);  // the source is only read
}

TEST_CASE("CopyCli: folder -> PostgreSQL -> folder, verify passes on each copy") {
  auto admin = alphaledger::test_support::test_pg_uri();
  if (!admin) return;
  TempDir dir;
  const std::string from = dir.sub("from"), back = dir.sub("back");
  make_source(from);
  PgDatabase db(*admin);
  auto up = run_alphaledger(with_ledger(from, {"copy", "s", "--to", db.uri()}));
  INFO(up.err);
  REQUIRE(up.exit_code == 0);
  CHECK(up.out.find("verify ok: 35 steps") != std::string::npos);
  CHECK(view_of(db.uri(), "s") == view_of(from, "s"));
  auto down = run_alphaledger(with_ledger(db.uri(), {"copy", "s", "--to", back}));
  INFO(down.err);
  REQUIRE(down.exit_code == 0);
  CHECK(view_of(back, "s") == view_of(from, "s"));
  auto again = run_alphaledger(with_ledger(from, {"copy", "s", "--to", db.uri()}));
  CHECK(again.exit_code == 3);
  const std::string password = alphaledger::test_support::uri_password(db.uri());
  REQUIRE_FALSE(password.empty());
  for (const auto* r : {&up, &down, &again}) {
    CHECK(r->out.find(password) == std::string::npos);
    CHECK(r->err.find(password) == std::string::npos);
  }
}

// The decisions table puts an e-LOND stream's numbers in its e_value column; the copy writes the
// stream's configuration last, so the rows must still come out right (verify compares them).
TEST_CASE("CopyCli: an e-LOND stream into PostgreSQL verifies there, rows and all") {
  auto admin = alphaledger::test_support::test_pg_uri();
  if (!admin) return;
  TempDir dir;
  const std::string from = dir.sub("from");
  REQUIRE(run_alphaledger(with_ledger(from, {"new", "e", "--rule", "e-lond"})).exit_code == 0);
  auto piped = run_alphaledger(
      with_ledger(from, {"pipe", "e"}),
      "{\"id\":\"a\",\"e_value\":3.5}\n{\"id\":\"b\",\"e_value\":120}\n{\"id\":\"c\",\"e_value\":0.2}\n");
  INFO(piped.out << piped.err);
  REQUIRE(piped.exit_code == 0);
  PgDatabase db(*admin);
  auto up = run_alphaledger(with_ledger(from, {"copy", "e", "--to", db.uri()}));
  INFO(up.out << up.err);
  CHECK(up.exit_code == 0);
  auto verified = run_alphaledger(with_ledger(db.uri(), {"verify", "e"}));
  INFO(verified.out << verified.err);
  CHECK(verified.exit_code == 0);
}
