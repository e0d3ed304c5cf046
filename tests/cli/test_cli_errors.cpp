// How the command line reports failures (docs/errors.md): one exit code and code word per kind of
// error, with or without --json; usage mistakes answered with what was meant; "-" as stdin; plan's
// default level said out loud. Expected texts and codes are our own contract (common practice, no
// source) unless a line says otherwise.
#include <doctest/doctest.h>
#include <stdlib.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "support/process.hpp"
#include "support/temp_dir.hpp"

// The error table and the name matcher are tested directly as well: their sources are compiled into
// this test (the test binary does not link the executable's objects).
#include "cli/cli_errors.cpp"    // NOLINT(bugprone-suspicious-include)
#include "cli/usage_errors.cpp"  // NOLINT(bugprone-suspicious-include)

using alphaledger::test_support::ProcessResult;
using alphaledger::test_support::run_alphaledger;
using alphaledger::test_support::TempDir;

namespace {

std::vector<std::string> with_json(std::vector<std::string> args) {
  args.insert(args.begin(), "--json");
  return args;
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> lines;
  std::size_t start = 0;
  while (start < text.size()) {
    const auto nl = text.find('\n', start);
    lines.push_back(text.substr(start, nl == std::string::npos ? std::string::npos : nl - start));
    if (nl == std::string::npos) break;
    start = nl + 1;
  }
  return lines;
}

// Runs `args` with and without --json and checks the shared contract: the same exit code; without
// --json one "alphaledger: error: " line; with --json exactly one JSON object on stderr, with
// {"error": {"code", "message"}} and the same message; nothing on stdout. Returns the JSON error.
nlohmann::json expect_failure(const std::vector<std::string>& args, int exit_code, const std::string& code,
                              const std::string& input = {}) {
  const ProcessResult text = run_alphaledger(args, input);
  const ProcessResult json = run_alphaledger(with_json(args), input);
  CHECK(text.exit_code == exit_code);
  CHECK(json.exit_code == exit_code);
  CHECK(text.out.empty());
  CHECK(json.out.empty());
  const auto text_lines = lines_of(text.err);
  REQUIRE_MESSAGE(text_lines.size() == 1, text.err);
  CHECK(text_lines[0].rfind("alphaledger: error: ", 0) == 0);
  const auto json_lines = lines_of(json.err);
  REQUIRE_MESSAGE(json_lines.size() == 1, json.err);
  const auto j = nlohmann::json::parse(json_lines[0]);
  REQUIRE(j.is_object());
  CHECK(j.size() == 1);
  REQUIRE(j.contains("error"));
  CHECK(j["error"].size() == 2);
  CHECK(j["error"]["code"] == code);
  const std::string message = j["error"]["message"];
  CHECK(text_lines[0] == "alphaledger: error: " + message);
  return j;
}

std::string message_of(const nlohmann::json& j) { return j["error"]["message"].get<std::string>(); }

// CLI11 and standard-library wording that must never reach a user.
void check_no_library_text(const std::string& message) {
  for (const char* raw :
       {"Could not convert", "ConversionError", "ValidationError", "ExtrasError", "RequiredError",
        "A subcommand", "were not expected", "was not expected", "Run with --help", "stod", "stoull", "stoi",
        "parse_error", "not in {", "required but received", "Expected exactly"}) {
    CHECK_MESSAGE(message.find(raw) == std::string::npos, message);
  }
}

}  // namespace

// ---- each kind of error: exit code and JSON form ---------------------------------------------

TEST_CASE("CliErrors: invalid input exits 2 as invalid_input, with or without --json") {
  TempDir s;
  const auto j = expect_failure({"replay", s.write("bad.csv", "id,p_value\na,1.3\n")}, 2, "invalid_input");
  CHECK(message_of(j).find("bad.csv:2:") != std::string::npos);
}

TEST_CASE("CliErrors: a command line that cannot be parsed exits 2 as usage, with or without --json") {
  const auto j = expect_failure({"replya", "x.csv"}, 2, "usage");
  CHECK(message_of(j).find("did you mean 'replay'?") != std::string::npos);
  // --json after the command is honoured too, even though parsing failed.
  const auto late = run_alphaledger({"replay", "x.csv", "--sumary", "--json"});
  CHECK(late.exit_code == 2);
  CHECK(nlohmann::json::parse(late.err)["error"]["code"] == "usage");
}

TEST_CASE("CliErrors: refusals exit 3 as no_ledger, unknown_stream and conflict") {
  TempDir s;
  const std::string db = s.sub("ledger");
  const auto none = expect_failure({"--ledger", db, "next", "checkout"}, 3, "no_ledger");
  CHECK(message_of(none).find("no ledger at") != std::string::npos);
  // The store says what happened; the command line adds the flag that names a ledger.
  CHECK(message_of(none).find("give the ledger folder or URI with --ledger") != std::string::npos);
  const auto none_recover = expect_failure({"--ledger", db, "recover", "--to", s.sub("copy")}, 3, "no_ledger");
  CHECK(message_of(none_recover).find("give the damaged ledger folder with --ledger DIR") != std::string::npos);
  REQUIRE(run_alphaledger({"--ledger", db, "new", "checkout", "--rule", "lord++"}).exit_code == 0);
  const auto unknown = expect_failure({"--ledger", db, "status", "checkuot"}, 3, "unknown_stream");
  CHECK(message_of(unknown).find("no stream named 'checkuot'") != std::string::npos);
  // decide --file puts FILE:LINE first; the code word is the same.
  const auto in_file =
      expect_failure({"--ledger", db, "decide", "nope", "--file", s.write("t.csv", "id,p_value\na,0.1\n")}, 3,
                     "unknown_stream");
  (void)in_file;
  expect_failure({"--ledger", db, "new", "checkout", "--rule", "saffron"}, 3, "conflict");
  REQUIRE(run_alphaledger({"--ledger", db, "decide", "checkout", "--id", "a", "--p", "0.01"}).exit_code == 0);
  expect_failure({"--ledger", db, "decide", "checkout", "--id", "a", "--p", "0.02"}, 3, "conflict");
}

TEST_CASE("CliErrors: a damaged ledger exits 4 as corruption") {
  TempDir s;
  const std::string db = s.sub("db");
  REQUIRE(run_alphaledger({"--ledger", db, "new", "s", "--rule", "lond"}).exit_code == 0);
  std::ofstream(db + "/CURRENT", std::ios::trunc) << "garbage\n";
  const auto j = expect_failure({"--ledger", db, "status", "s"}, 4, "corruption");
  CHECK(message_of(j).find("is corrupt") != std::string::npos);
  // The store says what is damaged; the command line adds how to copy what can be proven.
  CHECK(message_of(j).find("alphaledger --ledger " + db + " recover --to NEWDIR") != std::string::npos);
}

TEST_CASE("CliErrors: lower layers say what happened, the command line adds the command to run next") {
  using alphaledger::cli::failure_from;
  // Errors as the store builds them (src/store/ledger.cpp, rocksdb_messages.cpp): no command in
  // the message, the reason and subject for the front end.
  const auto unknown = alphaledger::with_reason(
      alphaledger::not_found("no stream named 'x' in ledger db", "unknown_stream"), "unknown_stream", "x");
  CHECK(failure_from(unknown).message ==
        "no stream named 'x' in ledger db (create it first: alphaledger new x --rule RULE)");
  const auto closed = alphaledger::with_reason(alphaledger::conflict("stream 's' is closed"), "closed_stream", "s");
  CHECK(failure_from(closed).message ==
        "stream 's' is closed (its history stays readable: alphaledger history s)");
  CHECK(failure_from(closed).code == "conflict");  // the reason is never the printed code word
  const auto damaged = alphaledger::with_reason(alphaledger::corruption("ledger db is corrupt: x. Nothing was changed."),
                                                "damaged_ledger", "db");
  CHECK(failure_from(damaged).message.find("Nothing was changed. Copy what can be proven into a new folder with: "
                                           "alphaledger --ledger db recover --to NEWDIR") != std::string::npos);
  // with_message keeps the reason, so advice survives a prefix such as "line 3: ".
  CHECK(failure_from(alphaledger::with_message(closed, "line 3: " + closed.message)).message ==
        "line 3: stream 's' is closed (its history stays readable: alphaledger history s)");
  // No reason, no advice.
  CHECK(failure_from(alphaledger::conflict("stream 's' is closed")).message == "stream 's' is closed");
}

TEST_CASE("CliErrors: closed streams and unknown streams are advised on the command line only") {
  TempDir s;
  const std::string db = s.sub("db");
  REQUIRE(run_alphaledger({"--ledger", db, "new", "s", "--rule", "lond"}).exit_code == 0);
  REQUIRE(run_alphaledger({"--ledger", db, "close", "s"}).exit_code == 0);
  const auto closed = expect_failure({"--ledger", db, "decide", "s", "--id", "a", "--p", "0.01"}, 3, "conflict");
  CHECK(message_of(closed).find("its history stays readable: alphaledger history s") != std::string::npos);
  const auto unknown = expect_failure({"--ledger", db, "status", "t"}, 3, "unknown_stream");
  CHECK(message_of(unknown).find("create it first: alphaledger new t --rule RULE") != std::string::npos);
}

TEST_CASE("CliErrors: storage failures exit 4 as storage") {
  TempDir s;
  const std::string not_a_folder = s.write("plain-file", "not a ledger\n");
  const auto j = expect_failure({"--ledger", not_a_folder, "new", "s", "--rule", "lond"}, 4, "storage");
  CHECK(message_of(j).find("not a folder") != std::string::npos);
}

TEST_CASE("CliErrors: the table maps every kind to one exit code and code word") {
  using alphaledger::cli::failure_from;
  using alphaledger::cli::internal_failure;
  using alphaledger::cli::usage_failure;
  struct Case {
    alphaledger::Error error;
    int exit_code;
    const char* code;
  };
  // One row per error kind (alphaledger/result.hpp), then the specific code words the ledger
  // attaches. The exit codes are docs/errors.md's table (common practice, no source).
  const Case cases[] = {
      {alphaledger::invalid_input("p_value must be in [0, 1]"), 2, "invalid_input"},
      {alphaledger::not_found("no such thing"), 3, "not_found"},
      {alphaledger::conflict("test 'a' was already decided in stream 's'"), 3, "conflict"},
      {alphaledger::corruption("ledger db is corrupt: a record is truncated"), 4, "corruption"},
      {alphaledger::io_error("cannot write to ledger db: No space left on device"), 4, "storage"},
      {alphaledger::busy("ledger db is in use: its lock file db/LOCK is held"), 4, "busy"},
      {alphaledger::not_found("no stream named 's' in ledger db", "unknown_stream"), 3, "unknown_stream"},
      {alphaledger::not_found("no ledger at db", "no_ledger"), 3, "no_ledger"},
      {alphaledger::conflict("stream s fails verification at step 3: level differs", "verification_failed"), 3,
       "verification_failed"},
      // The code word comes from the kind, never from the message's wording.
      {alphaledger::conflict("no stream named 's' (a conflict whatever the words say)"), 3, "conflict"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.error.message);
    const auto f = failure_from(c.error);
    CHECK(f.exit_code == c.exit_code);
    CHECK(f.code == c.code);
    CHECK(f.message == c.error.message);
  }
  CHECK(usage_failure("x").exit_code == 2);
  CHECK(usage_failure("x").code == "usage");
  CHECK(internal_failure("x").exit_code == 4);
  CHECK(internal_failure("x").code == "internal");
  // A message with bytes that are not UTF-8 still gives one valid JSON object.
  const auto j = nlohmann::json::parse(alphaledger::cli::failure_json(usage_failure("bad \xff byte")));
  CHECK(j["error"]["code"] == "usage");
}

TEST_CASE("CliErrors: with --json, log lines on stderr are JSON objects too") {
  const auto r = run_alphaledger(
      {"--json", "--log-level", "info", "simulate", "--tests", "20", "--runs", "2", "--rules", "lond"});
  REQUIRE(r.exit_code == 0);
  const auto lines = lines_of(r.err);
  REQUIRE(!lines.empty());
  for (const auto& line : lines) {
    CAPTURE(line);
    const auto j = nlohmann::json::parse(line);
    CHECK(j["level"] == "info");
    CHECK(j.contains("message"));
    CHECK(j.contains("time"));
  }
}

// An id with a byte that is not UTF-8 used to stop `replay --json` half-way with the JSON
// library's exception text and exit 4. Whether such an id is refused as input (exit 2) or written
// with a replacement character (exit 0), no library text reaches the user.
TEST_CASE("CliErrors: replay --json never ends in a JSON library exception") {
  TempDir s;
  const auto r =
      run_alphaledger({"--json", "replay", s.write("utf.csv", "id,p_value\nab\xff,0.01\nok,0.2\n")});
  CHECK(r.exit_code != 4);
  CHECK(r.err.find("json.exception") == std::string::npos);
  if (r.exit_code == 0) {
    for (const auto& line : lines_of(r.out)) CHECK(nlohmann::json::accept(line));
  } else {
    CHECK(r.exit_code == 2);
    CHECK(nlohmann::json::parse(r.err)["error"]["code"] == "invalid_input");
  }
}

// ---- usage mistakes ----------------------------------------------------------------------

TEST_CASE("CliErrors: unknown commands and flags get 'did you mean'") {
  struct Case {
    std::vector<std::string> args;
    std::string says;
  };
  const Case cases[] = {
      {{"replya", "x.csv"}, "unknown command 'replya'; did you mean 'replay'?"},
      {{"simulte", "--tests", "5"}, "unknown command 'simulte'; did you mean 'simulate'?"},
      {{"stat", "s"}, "unknown command 'stat'; did you mean 'status'?"},
      {{"frobnicate"}, "unknown command 'frobnicate'; commands: replay, new, decide"},
      {{"pvalue", "proportion", "--control", "10:1"},
       "unknown command 'proportion' for 'alphaledger pvalue'; did you mean 'proportions'?"},
      {{"replay", "x.csv", "--sumary"},
       "unknown option '--sumary' for 'alphaledger replay'; did you mean '--summary'?"},
      {{"replay", "x.csv", "--rule", "lond"}, "did you mean '--rules'?"},
      {{"simulate", "--tests", "5", "--runs", "2", "--seeds", "4"}, "did you mean '--seed'?"},
      {{"--jsno", "streams"}, "unknown option '--jsno' for 'alphaledger'; did you mean '--json'?"},
      {{"replay", "a.csv", "b.csv"}, "unexpected argument 'b.csv' for 'alphaledger replay'"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.says);
    const auto j = expect_failure(c.args, 2, "usage");
    CHECK_MESSAGE(message_of(j).find(c.says) != std::string::npos, message_of(j));
    CHECK(message_of(j).find("--help") != std::string::npos);
    check_no_library_text(message_of(j));
  }
}

TEST_CASE("CliErrors: a missing command or required argument is named, with what it takes") {
  struct Case {
    std::vector<std::string> args;
    std::string says;
  };
  const Case cases[] = {
      {{}, "no command given; commands: replay, new, decide"},
      {{"--json"}, "no command given"},
      {{"pvalue"}, "'alphaledger pvalue' needs a command; commands: proportions, means, statistic"},
      {{"plan"}, "'alphaledger plan' needs a command; commands: proportions, means"},
      {{"replay"}, "FILE is required by 'alphaledger replay' (log of tests"},
      {{"simulate", "--runs", "5"}, "--tests is required by 'alphaledger simulate' (tests per stream"},
      {{"new", "s"}, "--rule is required by 'alphaledger new' (alpha-spending, alpha-investing"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.says);
    const auto r = run_alphaledger(c.args);
    CHECK(r.exit_code == 2);
    CHECK_MESSAGE(r.err.find(c.says) != std::string::npos, r.err);
    check_no_library_text(r.err);
  }
}

TEST_CASE("CliErrors: bad option values name the flag, an excerpt of the value and what is accepted") {
  TempDir s;
  const std::string ok = s.write("ok.csv", "id,p_value\na,0.1\n");
  const std::string huge(5000, '7');
  struct Case {
    std::vector<std::string> args;
    std::string says;
  };
  const Case cases[] = {
      {{"replay", ok, "--alpha", "abc"}, "--alpha must be a finite number, got 'abc' (target FDR"},
      {{"replay", ok, "--alpha=0.1x"}, "--alpha must be a finite number, got '0.1x'"},
      {{"replay", ok, "--alpha", "nan"}, "--alpha must be a finite number, got 'nan'"},
      {{"replay", ok, "--alpha"}, "--alpha needs a value (target FDR"},
      {{"replay", ok, "--alpha", "--summary"}, "--alpha needs a value"},
      {{"replay", ok, "--alpha", "0.1", "--alpha", "0.2"}, "--alpha was given more than once; give it once"},
      {{"replay", ok, "--format", "xml"}, "--format: 'xml' is not accepted; accepted: {csv,jsonl}"},
      {{"--log-level", "loud", "streams"},
       "--log-level: 'loud' is not accepted; accepted: {trace,debug,info,warn,error,off}"},
      {{"decide", "s", "--file", ok, "--sync-every", "-1"},
       "--sync-every must be a whole number >= 0 (decimal digits), got '-1'"},
      {{"verify", "s", "--at-step", "two"},
       "--at-step must be a whole number >= 0 (decimal digits), got 'two'"},
      {{"serve", "--threads", "many"}, "--threads must be a whole number >= 0 (decimal digits), got 'many'"},
      {{"serve", "--threads", "5000"},
       "--threads: '5000' is not accepted; accepted: INT in [1 - 1024] (worker threads"},
      {{"pvalue", "statistic", "--z", "1..5"}, "--z must be a finite number, got '1..5'"},
      {{"pvalue", "proportions", "--control", "100:10", "--treatment", "100:12", "--confidence", "high"},
       "--confidence must be a finite number, got 'high'"},
      {{"plan", "means", "--sd", "one", "--min-effect", "1"}, "--sd must be a finite number, got 'one'"},
      {{"simulate", "--tests", "ten", "--runs", "2"},
       "--tests must be a whole number (decimal digits), got 'ten'"},
      {{"simulate", "--tests", "10", "--runs", "2", "--effect", huge},
       "--effect must be a finite number, got '777"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.says);
    const auto j = expect_failure(c.args, 2, "usage");
    const std::string m = message_of(j);
    CHECK_MESSAGE(m.find(c.says) != std::string::npos, m);
    CHECK(m.size() < 400);  // the 5000-digit value is shown as an excerpt
    check_no_library_text(m);
  }
}

TEST_CASE("CliErrors: values checked after parsing echo only an excerpt") {
  const std::string huge(5000, '9');
  const auto j = expect_failure({"pvalue", "proportions", "--control", huge, "--treatment", "100:12"}, 2,
                                "invalid_input");
  CHECK(message_of(j).find("--control must be USERS:CONVERSIONS") != std::string::npos);
  CHECK(message_of(j).size() < 400);
  const auto seed =
      expect_failure({"simulate", "--tests", "10", "--runs", "2", "--seed", "1" + huge}, 2, "invalid_input");
  CHECK(message_of(seed).find("--seed must be a whole number") != std::string::npos);
  CHECK(message_of(seed).size() < 400);
}

TEST_CASE("CliErrors: close names are found by edit distance, and only close ones") {
  using alphaledger::cli::closest_names;
  using alphaledger::cli::edit_distance;
  // Optimal string alignment distance (Damerau 1964; a transposition counts as one edit).
  CHECK(edit_distance("replya", "replay") == 1);
  CHECK(edit_distance("kitten", "sitting") == 3);  // the textbook Levenshtein example
  CHECK(edit_distance("", "abc") == 3);
  CHECK(edit_distance("same", "same") == 0);
  const std::vector<std::string> commands = {"replay", "new", "decide", "next", "status", "streams"};
  CHECK(closest_names("replya", commands) == std::vector<std::string>{"replay"});
  CHECK(closest_names("nex", commands) == std::vector<std::string>{"new", "next"});
  CHECK(closest_names("zzzzzz", commands).empty());
  CHECK(closest_names("--sumary", {"--summary", "--rules"}) == std::vector<std::string>{"--summary"});
  CHECK(closest_names(std::string(500, 'a'), commands).empty());
}

// ---- stdin --------------------------------------------------------------------------------

TEST_CASE("CliErrors: '-' reads a log from standard input for replay and decide --file") {
  TempDir s;
  const std::string csv = "id,p_value\na,0.0004\nb,0.2\nc,0.001\n";
  const auto from_file = run_alphaledger({"replay", s.write("log.csv", csv), "--rules", "lond,lord++"});
  REQUIRE(from_file.exit_code == 0);
  const auto from_stdin = run_alphaledger({"replay", "-", "--rules", "lond,lord++"}, csv);
  CHECK(from_stdin.exit_code == 0);
  CHECK(from_stdin.out == from_file.out);
  // JSON Lines are recognised by their first byte, or named with --format.
  const std::string jsonl =
      "{\"id\": \"a\", \"p_value\": 0.0004}\n{\"id\": \"b\", \"p_value\": 0.2}\n{\"id\": \"c\", \"p_value\": "
      "0.001}\n";
  CHECK(run_alphaledger({"replay", "-", "--rules", "lond,lord++"}, jsonl).out == from_file.out);
  CHECK(run_alphaledger({"replay", "-", "--format", "jsonl", "--rules", "lond,lord++"}, jsonl).out ==
        from_file.out);
  // Errors name stdin and the line.
  const auto bad = run_alphaledger({"replay", "-"}, "id,p_value\na,0.1\nb,7\n");
  CHECK(bad.exit_code == 2);
  CHECK(bad.err.find("stdin:3:") != std::string::npos);

  const std::string db = s.sub("ledger");
  REQUIRE(run_alphaledger({"--ledger", db, "new", "s", "--rule", "lord++"}).exit_code == 0);
  const auto decided = run_alphaledger({"--ledger", db, "decide", "s", "--file", "-"}, csv);
  CHECK(decided.exit_code == 0);
  const auto replayed = run_alphaledger({"replay", "-", "--rules", "lord++"}, csv);
  CHECK(decided.out == replayed.out);  // same columns, same levels and decisions
  const auto history = run_alphaledger({"--ledger", db, "--json", "status", "s"});
  CHECK(nlohmann::json::parse(history.out)["tests"] == 3);
}

// ---- plan's default level -------------------------------------------------------------------

// R 4.2: power.t.test(delta = 0.5, sd = 1, sig.level = 0.05, power = 0.8) gives n = 63.76576,
// so 64 per arm.
TEST_CASE("CliErrors: plan without --level or --stream uses 0.05 and says so") {
  const std::vector<std::string> args = {"plan", "means", "--sd", "1", "--min-effect", "0.5"};
  const auto text = run_alphaledger(args);
  REQUIRE(text.exit_code == 0);
  CHECK(text.err.find("note: no --level or --stream given, so the plan uses level 0.05") !=
        std::string::npos);
  CHECK(text.out.find("(default: no --level or --stream given)") != std::string::npos);
  const auto json = run_alphaledger(with_json(args));
  REQUIRE(json.exit_code == 0);
  CHECK(json.err.empty());
  const auto j = nlohmann::json::parse(json.out);
  CHECK(j["level"] == 0.05);
  CHECK(j["level_source"] == "default");
  CHECK(j["n_per_arm"] == 64);
  CHECK(j["n_per_arm_exact"].get<double>() == doctest::Approx(63.76576).epsilon(1e-6));
  auto given = args;
  given.insert(given.end(), {"--level", "0.05"});
  const auto explicit_level = run_alphaledger(with_json(given));
  REQUIRE(explicit_level.exit_code == 0);
  CHECK(nlohmann::json::parse(explicit_level.out)["level_source"] == "given");
  CHECK(explicit_level.err.empty());
  auto both = given;
  both.insert(both.end(), {"--stream", "s"});
  const auto j2 = expect_failure(both, 2, "invalid_input");
  CHECK(message_of(j2).find("give at most one of --level") != std::string::npos);
}

// ---- help ---------------------------------------------------------------------------------

TEST_CASE("CliErrors: the top-level help ends with the caution for clinical and safety settings") {
  const auto r = run_alphaledger({"--help"});
  REQUIRE(r.exit_code == 0);
  const auto caution = r.out.find("does not replace a pre-registered analysis plan");
  REQUIRE(caution != std::string::npos);
  CHECK(r.out.find("qualified") != std::string::npos);
  CHECK(r.out.find("local regulator") != std::string::npos);
  CHECK(r.out.find("Subcommands:") < caution);  // in the footer, after the list of commands
}

TEST_CASE("CliErrors: serve names the flag that gave a bad address or token file") {
  TempDir s;
  const std::string db = s.sub("ledger");
  REQUIRE(run_alphaledger({"--ledger", db, "new", "checkout", "--rule", "lord++"}).exit_code == 0);
  // The service's message names the value; the command line adds the flag (our contract).
  const auto bad_listen = expect_failure({"--ledger", db, "serve", "--listen", "127.0.0.1"}, 2, "invalid_input");
  CHECK(message_of(bad_listen).find("has no port") != std::string::npos);
  CHECK(message_of(bad_listen).find("(given with --listen HOST:PORT)") != std::string::npos);
  const auto bad_token =
      expect_failure({"--ledger", db, "serve", "--token-file", s.sub("absent-token")}, 2, "invalid_input");
  CHECK(message_of(bad_token).find("(given with --token-file FILE)") != std::string::npos);
}

TEST_CASE("CliErrors: the log reader says what is missing; the command line names the flag") {
  // A file whose name tells no format (src/harness/test_log_fields.cpp).
  TempDir s;
  const auto j = expect_failure({"replay", s.write("log.txt", "id,p_value\na,0.1\n")}, 2, "invalid_input");
  CHECK(message_of(j).find("or give the format (csv or jsonl) (--format csv|jsonl)") != std::string::npos);
}

TEST_CASE("CliErrors: a parameter the library names is shown under its flag") {
  using alphaledger::cli::failure_from;
  // The harness names the model's field (src/harness/simulate.cpp); the command line its flag.
  const auto e = alphaledger::invalid_field("nonnull_fraction", "must be in [0, 1], got 1.5");
  CHECK(e.message == "nonnull_fraction must be in [0, 1], got 1.5");
  CHECK(failure_from(e).message == "--nonnull-fraction must be in [0, 1], got 1.5");
  // A message that no longer starts with the field (a prefix was added) is left as it is.
  CHECK(failure_from(alphaledger::with_message(e, "run 3: " + e.message)).message == "run 3: " + e.message);
  const auto j = expect_failure({"simulate", "--tests", "10", "--runs", "2", "--nonnull-fraction", "1.5"}, 2,
                                "invalid_input");
  CHECK(message_of(j).find("--nonnull-fraction must be in [0, 1], got 1.5") != std::string::npos);
}
