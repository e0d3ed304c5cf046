// The command line builds only the command it was given (src/cli/main.cpp, docs/benchmarks.md "CLI
// fixed cost after lazy start"); every help text and every usage error must stay what it was when
// the whole app was built for every line. The expected texts below were recorded from the build
// before that change (main at 82e3492); they are our own contract (common practice, no source).
#include <doctest/doctest.h>

#include <string>
#include <vector>

#include "support/process.hpp"
#include "support/temp_dir.hpp"

using alphaledger::test_support::ProcessResult;
using alphaledger::test_support::run_alphaledger;
using alphaledger::test_support::TempDir;

namespace {

// CLI11 prints the program as it was started; the recorded texts say PROGRAM instead.
std::string with_program(std::string text) {
  const std::string program = ALPHALEDGER_BINARY;
  for (std::size_t at = text.find(program); at != std::string::npos; at = text.find(program, at)) {
    text.replace(at, program.size(), "PROGRAM");
  }
  return text;
}

std::string version() {
  auto r = run_alphaledger({"--version"});
  REQUIRE(r.exit_code == 0);
  REQUIRE(!r.out.empty());
  return r.out.substr(0, r.out.size() - 1);  // without the newline
}

const char* const kFooter =
    "A FILE argument of '-' reads standard input. Exit codes: 0 success, 2 bad usage or input,\n"
    "3 refused by the ledger, 4 storage failure; with --json a failure is one JSON object on\n"
    "stderr (docs/errors.md).\n"
    "\n"
    "Caution: where decisions affect people's health or safety (clinical, safety-critical\n"
    "settings), alphaledger does not replace a pre-registered analysis plan, a qualified\n"
    "statistician, or the rules of your local regulator.\n";

const char* const kCommands =
    "replay, new, decide, next, status, streams, history, verify, close, launch, abandon, running, "
    "copy, simulate, pvalue, plan, pipe, serve, recover, report, explain, look, looks";

}  // namespace

TEST_CASE("the top-level help is the whole app's, byte for byte") {
  const std::string expected =
      "alphaledger " + version() +
      ": decide each hypothesis test the moment it finishes, keeping the false discovery\n"
      "rate of the whole stream below a target (LORD++, SAFFRON, ADDIS, LOND, alpha-investing,\n"
      "alpha-spending), with a durable, verifiable ledger.\n"
      "Usage: PROGRAM [OPTIONS] SUBCOMMAND\n"
      "\n"
      "Options:\n"
      "  -h,--help                   Print this help message and exit\n"
      "  --version                   Display program version information and exit\n"
      "  --ledger TEXT               ledger folder or postgresql:// URI; default $ALPHALEDGER_LEDGER, "
      "else ./alphaledger.db\n"
      "  --json                      machine-readable output, one JSON object per line; errors too, as one "
      "JSON object on stderr\n"
      "  --log-level TEXT:{trace,debug,info,warn,error,off}\n"
      "                              trace|debug|info|warn|error|off; default warn\n"
      "\n"
      "Subcommands:\n"
      "  replay                      decide a whole log of finished tests with one or more rules, touching "
      "no "
      "ledger\n"
      "  new                         create a stream; its rule and parameters are frozen from now on\n"
      "  decide                      decide one test (--id, --p) or a log of tests (--file); each answer is "
      "durable before it is printed\n"
      "  next                        the level the next test of a stream will get; changes nothing\n"
      "  status                      a stream's configuration, tests, rejections, wealth and next level\n"
      "  streams                     one line per stream in the ledger\n"
      "  history                     every decided or abandoned test of a stream, in order, with its launch "
      "and decision times\n"
      "  verify                      replay a stream's history through its rule and check every record and "
      "the hash chain\n"
      "  close                       close a stream: it takes no more tests; its history stays readable and "
      "verifiable\n"
      "  launch                      start a test: reserve its level now and print it; decide it later with "
      "decide\n"
      "  abandon                     stop a running test that will never be decided; its reserved level is "
      "not refunded\n"
      "  running                     the tests of a stream launched and not yet decided: id, launch, level, "
      "launched_at\n"
      "  copy                        copy one stream (its whole history) from --ledger into another ledger "
      "location, then verify the copy; the source is only read\n"
      "  simulate                    decide many simulated streams of one-sided z-tests with each rule: "
      "realized FDR, mFDR, FWER and power\n"
      "  pvalue                      a p-value, estimate and confidence interval from experiment summaries\n"
      "  plan                        users per arm for an experiment at a given level or at a stream's next "
      "level; or its power, or the smallest detectable effect\n"
      "  pipe                        decide tests read as JSON Lines from stdin ({\"id\": ..., \"p_value\": "
      "...}); one answer per line on stdout\n"
      "  serve                       serve the ledger over HTTP/JSON (docs/http.md); stops cleanly on "
      "SIGTERM/SIGINT\n"
      "  recover                     copy every stream's configuration and every decision that can be proven "
      "from a damaged ledger (--ledger) into a new folder; the damaged ledger is not changed\n"
      "  report                      write one self-contained HTML page about a stream: charts, "
      "configuration, every decision\n"
      "  explain                     why a test gets its level: the rule's formula with the numbers filled "
      "in, term by term\n"
      "  look                        look at a running (launched) test: the always-valid p-value from the "
      "cumulative summaries so far; stop (and decide it) once the running minimum reaches the reserved "
      "level, else continue\n"
      "  looks                       list the looks at one test, oldest first (CSV, or --json)\n"
      "\n" +
      std::string(kFooter);
  for (const std::vector<std::string>& args :
       {std::vector<std::string>{"--help"}, {"-h"}, {"--json", "--help"}, {"--ledger", "x", "--help"}}) {
    CAPTURE(args.front());
    const ProcessResult r = run_alphaledger(args);
    CHECK(r.exit_code == 0);
    CHECK(with_program(r.out) == expected);
    CHECK(r.err.empty());
  }
}

TEST_CASE("a command's help is the same, wherever the help flag stands") {
  const std::string expected =
      "a stream's configuration, tests, rejections, wealth and next level\n"
      "Usage: PROGRAM status [OPTIONS] stream\n"
      "\n"
      "Positionals:\n"
      "  stream TEXT REQUIRED        stream name\n"
      "\n"
      "Options:\n"
      "  -h,--help                   Print this help message and exit\n"
      "\n" +
      std::string(kFooter);
  for (const std::vector<std::string>& args : {std::vector<std::string>{"status", "--help"},
                                               {"status", "S", "--help"},
                                               {"--ledger", "x", "status", "-h"}}) {
    CAPTURE(args.back());
    const ProcessResult r = run_alphaledger(args);
    CHECK(r.exit_code == 0);
    CHECK(with_program(r.out) == expected);
  }
}

TEST_CASE("unknown and missing commands get the whole list, as before") {
  auto r = run_alphaledger({"stauts", "S"});
  CHECK(r.exit_code == 2);
  CHECK(r.err ==
        "alphaledger: error: unknown command 'stauts'; did you mean 'status'? (see 'alphaledger --help')\n");
  r = run_alphaledger({"--json", "frobnicate"});
  CHECK(r.exit_code == 2);
  CHECK(r.err ==
        std::string(R"x({"error":{"code":"usage","message":"unknown command 'frobnicate'; commands: )x") +
            kCommands + R"x( (see 'alphaledger --help')"}})x" + "\n");
  r = run_alphaledger({"--ledger", "x"});
  CHECK(r.exit_code == 2);
  CHECK(r.err == std::string("alphaledger: error: no command given; commands: ") + kCommands +
                     " (see 'alphaledger --help')\n");
  r = run_alphaledger({"status", "--bogus", "S"});
  CHECK(r.exit_code == 2);
  CHECK(r.err ==
        "alphaledger: error: unknown option '--bogus' for 'alphaledger status' (see 'alphaledger status "
        "--help')\n");
  r = run_alphaledger({"status", "S", "extra"});
  CHECK(r.exit_code == 2);
  CHECK(r.err ==
        "alphaledger: error: unexpected argument 'extra' for 'alphaledger status' (see 'alphaledger status "
        "--help')\n");
  r = run_alphaledger({"--log-level", "loud", "status", "S"});
  CHECK(r.exit_code == 2);
  CHECK(r.err.find("--log-level: 'loud' is not accepted; accepted: {trace,debug,info,warn,error,off}") !=
        std::string::npos);
}

TEST_CASE("a command built alone runs as it did, in every form of the global flags") {
  TempDir dir;
  const std::string ledger = dir.path() + "/l";
  REQUIRE(run_alphaledger({"--ledger", ledger, "new", "S", "--rule", "lond"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", ledger, "decide", "S", "--id", "a", "--p", "0.5"}).exit_code == 0);
  const auto plain = run_alphaledger({"--ledger", ledger, "status", "S"});
  REQUIRE(plain.exit_code == 0);
  CHECK(plain.out.find("tests       1\n") != std::string::npos);
  for (const std::vector<std::string>& args : {std::vector<std::string>{"--ledger=" + ledger, "status", "S"},
                                               {"--log-level", "error", "--ledger", ledger, "status", "S"},
                                               {"status", "S", "--ledger", ledger}}) {
    const auto r = run_alphaledger(args);
    CHECK(r.exit_code == 0);
    CHECK(r.out == plain.out);
  }
  // A stream may be named like a command; such a line is read by the whole app, as before.
  REQUIRE(run_alphaledger({"--ledger", ledger, "new", "next", "--rule", "lond"}).exit_code == 0);
  const auto named = run_alphaledger({"--ledger", ledger, "--json", "next", "next"});
  CHECK(named.exit_code == 0);
  CHECK(named.out.find(R"("stream":"next")") != std::string::npos);
}

// The hint added to "no ledger at" asked the app whether `recover` was parsed by name, which
// CLI11 answers by throwing when the app holds only the command that ran (exit 1 instead of 3).
TEST_CASE("the missing-ledger hint still names the right flag for recover and for the others") {
  TempDir dir;
  const std::string missing = dir.path() + "/none";
  auto r = run_alphaledger({"--ledger", missing, "recover", "--to", dir.path() + "/new"});
  CHECK(r.exit_code == 3);
  CHECK(r.err == "alphaledger: error: no ledger at " + missing +
                     " (give the damaged ledger folder with --ledger DIR)\n");
  r = run_alphaledger({"--ledger", missing, "status", "S"});
  CHECK(r.exit_code == 3);
  CHECK(r.err == "alphaledger: error: no ledger at " + missing +
                     " (create a stream first, or give the ledger folder or URI with --ledger)\n");
}
