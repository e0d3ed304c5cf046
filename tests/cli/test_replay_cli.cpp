// alphaledger replay, end to end through the executable (docs/cli.md "Replay").
#include <doctest/doctest.h>

#include <algorithm>
#include <fstream>
#include <map>
#include <set>
#include <string>

#include "support/process.hpp"
#include "support/temp_dir.hpp"

using alphaledger::test_support::run_alphaledger;

namespace {
const std::string kDemo = std::string(ALPHALEDGER_SOURCE_DIR) + "/replay_data/larkspur_experiments.csv";
const std::string kSimulated = std::string(ALPHALEDGER_SOURCE_DIR) + "/replay_data/simulated_stream.csv";

// Files of these tests live in one folder, removed when the test binary ends.
std::string write_temp(const std::string& name, const std::string& text) {
  static const alphaledger::test_support::TempDir dir;
  return dir.write(name, text);
}
}  // namespace

TEST_CASE("Replay: two runs give byte-identical output") {
  const std::vector<std::string> args = {"replay", kDemo, "--rules", "lord++,saffron,addis,lond,alpha-investing,alpha-spending,bh,storey-bh"};
  const auto a = run_alphaledger(args);
  const auto b = run_alphaledger(args);
  REQUIRE(a.exit_code == 0);
  CHECK(a.out == b.out);
  CHECK(a.out.rfind("rule,step,id,p_value,level,rejected,wealth\n", 0) == 0);
  CHECK(std::count(a.out.begin(), a.out.end(), '\n') == 1 + 8 * 420);
  const auto fast1 = run_alphaledger({"replay", kDemo, "--rules", "lord++,saffron,addis", "--evaluation", "fast", "--json"});
  const auto fast2 = run_alphaledger({"replay", kDemo, "--rules", "lord++,saffron,addis", "--evaluation", "fast", "--json"});
  REQUIRE(fast1.exit_code == 0);
  CHECK(fast1.out == fast2.out);
}

TEST_CASE("Replay: the summary counts discoveries and, with is_null, false discoveries and power") {
  const auto r = run_alphaledger({"replay", kSimulated, "--rules", "lord++,bh", "--summary"});
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.rfind("rule,tests,rejections,false_discoveries,fdp,power,guarantee\n", 0) == 0);
  CHECK(r.out.find("\nlord++,1000,") != std::string::npos);
  CHECK(r.out.find("\nbh,1000,") != std::string::npos);
  const auto no_truth = run_alphaledger({"replay", kDemo, "--summary"});
  REQUIRE(no_truth.exit_code == 0);
  CHECK(no_truth.out.find("\nlord++,420,") != std::string::npos);
  CHECK(no_truth.out.find(",,,FDR\n") != std::string::npos);  // no is_null: fdp columns empty
}

TEST_CASE("Replay: rows are decided in ascending finished_at, ties keep file order") {
  const std::string path = write_temp("order.csv",
                                      "id,finished_at,p_value\n"
                                      "late,2025-03-02,0.5\n"
                                      "early,2025-03-01T08:00:00Z,0.0001\n"
                                      "tie-a,2025-03-01T09:00:00+01:00,0.2\n"   // = 08:00Z, after 'early'
                                      "mid,2025-03-01T12:00:00Z,0.3\n");
  const auto r = run_alphaledger({"replay", path, "--rules", "alpha-spending"});
  REQUIRE(r.exit_code == 0);
  const auto first = r.out.find("alpha-spending,1,early,");
  const auto second = r.out.find("alpha-spending,2,tie-a,");
  const auto third = r.out.find("alpha-spending,3,mid,");
  const auto fourth = r.out.find("alpha-spending,4,late,");
  CHECK(first != std::string::npos);
  CHECK(second != std::string::npos);
  CHECK(third != std::string::npos);
  CHECK(fourth != std::string::npos);
  // The first level is alpha * gamma_1 = 0.05 / zeta(1.6) (docs/methods.md 14.1: 0.02187450829).
  CHECK(r.out.find("alpha-spending,1,early,1e-04,0.0218745082887") != std::string::npos);
}

TEST_CASE("Replay: JSON Lines input gives the same decisions as CSV") {
  const std::string csv = write_temp("same.csv", "id,p_value\na,0.0004\nb,0.0012\nc,0.36\n");
  const std::string jsonl = write_temp("same.jsonl",
                                       "{\"id\": \"a\", \"p_value\": 0.0004}\n{\"id\": \"b\", \"p_value\": 0.0012}\n"
                                       "{\"id\": \"c\", \"p_value\": 0.36}\n");
  const auto a = run_alphaledger({"replay", csv, "--rules", "lord++,saffron"});
  const auto b = run_alphaledger({"replay", jsonl, "--rules", "lord++,saffron"});
  REQUIRE(a.exit_code == 0);
  CHECK(a.out == b.out);
  // LORD++ first level with the defaults: docs/methods.md 14.3, 0.001370386057.
  CHECK(a.out.find("lord++,1,a,4e-04,0.00137038605") != std::string::npos);
}

TEST_CASE("Replay: bad input exits 2 naming file:line, the field, the value and what is accepted") {
  struct Case {
    std::string name, text, needle;
  };
  const std::vector<Case> cases = {
      {"range.csv", "id,p_value\na,0.1\nb,1.3\n", ":3: test 'b': p_value must be a number in [0, 1], got 1.3"},
      {"nan.csv", "id,p_value\na,NaN\n", ":2: test 'a': p_value must be a number in [0, 1]"},
      {"text.csv", "id,p_value\na,low\n", "p_value must be a number in [0, 1], got 'low'"},
      {"missing.csv", "name,p_value\na,0.1\n", ":1: the header has no 'id' column"},
      {"nop.csv", "id,score\na,0.1\n", ":2: test 'a': missing p_value"},
      {"dup.csv", "id,p_value\na,0.1\na,0.2\n", ":3: duplicate id 'a' (first at line 2)"},
      {"date.csv", "id,finished_at,p_value\na,2025-13-01,0.1\n", ":2: finished_at must be an ISO 8601 date"},
      {"fields.csv", "id,p_value\na,0.1,extra\n", ":2: expected 2 fields as in the header, got 3"},
      {"bad.jsonl", "{\"id\": \"a\", \"p_value\": 0.1}\n{not json}\n", ":2: not valid JSON (at byte"},
      {"type.jsonl", "{\"id\": \"a\", \"p_value\": \"0.1\"}\n", ":1: p_value must be a JSON number in [0, 1], got \"0.1\""},
  };
  for (const auto& c : cases) {
    CAPTURE(c.name);
    const auto r = run_alphaledger({"replay", write_temp(c.name, c.text)});
    CHECK(r.exit_code == 2);
    CHECK_MESSAGE(r.err.find(c.needle) != std::string::npos, r.err);
    CHECK(r.out.empty());
  }
  const std::string ok = write_temp("ok.csv", "id,p_value\na,0.1\n");
  const auto unknown = run_alphaledger({"replay", ok, "--rules", "lord++,holm"});
  CHECK(unknown.exit_code == 2);
  CHECK(unknown.err.find("unknown rule 'holm'; accepted:") != std::string::npos);
  const auto bad_param = run_alphaledger({"replay", ok, "--rules", "addis", "--candidate-threshold", "0.7"});
  CHECK(bad_param.exit_code == 2);
  CHECK(bad_param.err.find("lambda < tau") != std::string::npos);
  const auto unused = run_alphaledger({"replay", ok, "--rules", "lord++", "--payout", "0.01"});
  CHECK(unused.exit_code == 2);
  CHECK(unused.err.find("--payout is not taken by any listed rule") != std::string::npos);
  const auto absent = run_alphaledger({"replay", "/nonexistent/log.csv"});
  CHECK(absent.exit_code == 2);
  CHECK(absent.err.find("cannot open") != std::string::npos);
}

TEST_CASE("Replay: a flag applies to every listed rule that takes it") {
  const std::string path = write_temp("flags.csv", "id,p_value\na,0.0004\n");
  // --initial-wealth applies to lord++ and is ignored by lond, which does not take it.
  const auto r = run_alphaledger({"replay", path, "--rules", "lord++,lond", "--initial-wealth", "0.01"});
  REQUIRE(r.exit_code == 0);
  // LORD++ alpha_1 = W0 gamma_1 (docs/methods.md 5.2) = 0.01 * 0.05481544227 (gamma_1 of JM, section 13).
  CHECK(r.out.find("lord++,1,a,4e-04,0.000548154422") != std::string::npos);
}

TEST_CASE("Replay: standard input gives the output of the same file, blank lines before it counted") {
  // The reader takes blank bytes from stdin to find the format, then puts them back: line numbers
  // in messages still count them (common practice, no source).
  const std::string text = "id,p_value\na,0.0004\nb,0.0012\nc,0.36\n";
  const auto from_file = run_alphaledger({"replay", write_temp("stdin.csv", text), "--rules", "lord++,bh"});
  const auto from_stdin = run_alphaledger({"replay", "-", "--rules", "lord++,bh"}, std::string("\n \r\n").append(text));
  REQUIRE(from_file.exit_code == 0);
  REQUIRE(from_stdin.exit_code == 0);
  CHECK(from_stdin.out == from_file.out);
  const auto bad = run_alphaledger({"replay", "-"}, "\n\n{\"id\": \"a\", \"p_value\": 0.1}\n{\"id\": \"b\"}\n");
  CHECK(bad.exit_code == 2);
  CHECK_MESSAGE(bad.err.find("stdin:4: test 'b': missing p_value") != std::string::npos, bad.err);
}

TEST_CASE("Replay: a long log in time order and the same log shuffled give the same decisions") {
  // 20,000 rows, more than the reader's 64 KiB block; the shuffled copy must be put back in
  // time order before deciding (docs/formats.md). Expected: identical output (common practice).
  std::string ordered = "id,finished_at,p_value\n", shuffled = ordered;
  const int n = 20000;
  auto row = [](int i) {
    std::string r = "t";
    r += std::to_string(i);
    r += ',';
    r += std::to_string(1700000000 + i);
    r += ',';
    r += std::to_string(((i * 7919) % 1000) / 1000.0);
    r += '\n';
    return r;
  };
  for (int i = 0; i < n; ++i) ordered += row(i);
  for (int i = 0; i < n; ++i) shuffled += row((i * 7919) % n);  // 7919 is prime: a permutation
  const auto a = run_alphaledger({"replay", write_temp("ord.csv", ordered), "--rules", "lord++,saffron,storey-bh"});
  const auto b = run_alphaledger({"replay", write_temp("shuf.csv", shuffled), "--rules", "lord++,saffron,storey-bh"});
  REQUIRE(a.exit_code == 0);
  REQUIRE(b.exit_code == 0);
  CHECK(a.out == b.out);
  CHECK(std::count(a.out.begin(), a.out.end(), '\n') == 1 + 3 * n);
  const auto sa = run_alphaledger({"replay", write_temp("ord.csv", ordered), "--rules", "lord++,bh", "--summary", "--json"});
  const auto sb = run_alphaledger({"replay", write_temp("shuf.csv", shuffled), "--rules", "lord++,bh", "--summary", "--json"});
  REQUIRE(sa.exit_code == 0);
  CHECK(sa.out == sb.out);
}

// An id with a byte that is not UTF-8 (0xFF never occurs in UTF-8, RFC 3629 section 1): refused
// on input, exit 2 with the file, line and a \xHH excerpt, never a JSON library error (exit 4)
// half-way through the output. With --json the failure is itself one valid JSON object.
TEST_CASE("Replay: --json on an id that is not UTF-8 is a clear input error") {
  const std::string log = write_temp("bad-utf8.csv", "id,p_value\nok-1,0.01\nab\xff,0.02\n");
  const auto r = run_alphaledger({"--json", "replay", log});
  CHECK(r.exit_code == 2);
  CHECK(r.out.empty());
  CHECK(r.err.find("bad-utf8.csv:3: id must be valid UTF-8 text") != std::string::npos);
  CHECK(r.err.find("ab\\\\xff") != std::string::npos);  // the \xHH excerpt, escaped once more for JSON
  CHECK(r.err.find("type_error") == std::string::npos);
  CHECK(r.err.rfind("{\"error\":{\"code\":\"invalid_input\"", 0) == 0);
  const std::string jsonl = write_temp("bad-utf8.jsonl", "{\"id\": \"ab\xff\", \"p_value\": 0.02}\n");
  const auto j = run_alphaledger({"--json", "replay", jsonl});
  CHECK(j.exit_code == 2);
  CHECK(j.err.find("bad-utf8.jsonl:1: not valid JSON") != std::string::npos);
}

TEST_CASE("Replay: launched_at adds the launch column; bad launch times exit 2 with file:line") {
  // Source: docs/formats.md "Launch times" (our format).
  const std::string path = write_temp("launch.csv",
                                      "id,launched_at,finished_at,p_value\n"
                                      "A,1,5,0.00001\n"
                                      "B,2,3,0.0002\n");
  const auto r = run_alphaledger({"replay", path, "--rules", "lord++,bh"});
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.rfind("rule,step,launch,id,p_value,level,rejected,wealth\n", 0) == 0);
  CHECK(r.out.find("\nlord++,1,2,B,") != std::string::npos);
  CHECK(r.out.find("\nlord++,2,1,A,") != std::string::npos);
  CHECK(r.out.find("\nbh,1,,B,") != std::string::npos);
  const std::string bad = write_temp("launch_bad.csv",
                                     "id,launched_at,finished_at,p_value\n"
                                     "A,2025-03-05,2025-03-04,0.1\n");
  const auto e = run_alphaledger({"replay", bad});
  CHECK(e.exit_code == 2);
  CHECK(e.err.find("launch_bad.csv:2:") != std::string::npos);
  CHECK(e.out.empty());
}

TEST_CASE("Replay: e_value column for e-lond and e-bh; a rule without its column exits 2 naming both") {
  const std::string path = write_temp("evalues.csv", "id,p_value,e_value\na,0.001,1000\nb,0.5,0.2\n");
  const auto r = run_alphaledger({"replay", path, "--rules", "lord++,e-lond,e-bh"});
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.rfind("rule,step,id,p_value,e_value,level,rejected,wealth\n", 0) == 0);
  CHECK(r.out.find("\ne-lond,1,a,0.001,1000,") != std::string::npos);
  const std::string only_p = write_temp("only_p.csv", "id,p_value\na,0.001\n");
  const auto bad = run_alphaledger({"replay", only_p, "--rules", "e-lond"});
  CHECK(bad.exit_code == 2);
  CHECK(bad.err.find("rule e-lond reads e-values, and the log has no e_value column") != std::string::npos);
  const std::string negative = write_temp("negative.csv", "id,e_value\na,2\nb,-3\n");
  const auto neg = run_alphaledger({"replay", negative, "--rules", "e-lond"});
  CHECK(neg.exit_code == 2);
  CHECK(neg.err.find("negative.csv:3: test 'b': e_value") != std::string::npos);
}

TEST_CASE("Replay: --summary names each rule's guarantee; --rejected-only keeps only rejected rows") {
  // Guarantees from docs/rules.md: alpha-spending FWER, alpha-investing mFDR, the others FDR.
  const auto r = run_alphaledger({"replay", kDemo, "--rules", "lord++,alpha-investing,alpha-spending,bh", "--summary"});
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.find("\nlord++,420,7,,,,FDR\n") != std::string::npos);
  CHECK(r.out.find("\nalpha-investing,420,7,,,,mFDR\n") != std::string::npos);
  CHECK(r.out.find("\nalpha-spending,420,3,,,,FWER\n") != std::string::npos);
  CHECK(r.out.find("\nbh,420,20,,,,FDR\n") != std::string::npos);
  const auto only = run_alphaledger({"replay", kDemo, "--rules", "lord++,bh", "--rejected-only"});
  REQUIRE(only.exit_code == 0);
  CHECK(std::count(only.out.begin(), only.out.end(), '\n') == 1 + 7 + 20);  // header, then 7 + 20 rejections
  CHECK(only.out.find(",0,") == std::string::npos);  // no row with rejected = 0
}

TEST_CASE("Replay: no progress line when stderr is not a terminal") {
  // 210,000 decisions pass the length at which a terminal would see a progress line.
  std::string text = "id,p_value\n";
  for (int i = 0; i < 70000; ++i) {
    text += 't';
    text += std::to_string(i);
    text += i % 50 == 0 ? ",0.00001\n" : ",0.5\n";
  }
  const std::string path = write_temp("long.csv", text);
  const auto rows = run_alphaledger({"replay", path, "--rules", "lord++,lond,alpha-spending", "--rejected-only"});
  REQUIRE(rows.exit_code == 0);
  CHECK(rows.err.empty());  // piped: nothing on stderr
  CHECK(rows.out.find("replay:") == std::string::npos);
}

namespace {
std::vector<std::string> split_commas(const std::string& line) {
  std::vector<std::string> out;
  std::size_t start = 0;
  while (true) {
    const std::size_t c = line.find(',', start);
    out.push_back(line.substr(start, c == std::string::npos ? std::string::npos : c - start));
    if (c == std::string::npos) return out;
    start = c + 1;
  }
}
std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> out;
  std::size_t start = 0;
  while (start < text.size()) {
    const std::size_t nl = text.find('\n', start);
    out.push_back(text.substr(start, nl - start));
    start = nl + 1;
  }
  return out;
}
}  // namespace

TEST_CASE("Replay --wide: one row per test, the log's columns kept, the long form's levels and decisions") {
  // Compares the two forms of one run: no outside numbers, the long form is the reference.
  const auto lng = run_alphaledger({"replay", kDemo, "--rules", "lord++,saffron,bh"});
  const auto wide = run_alphaledger({"replay", kDemo, "--rules", "lord++,saffron,bh", "--wide"});
  REQUIRE(lng.exit_code == 0);
  REQUIRE(wide.exit_code == 0);
  const auto rows = lines_of(wide.out);
  REQUIRE(rows.size() == 1 + 420);
  CHECK(rows[0] ==
        "line,id,p_value,team,metric,finished_at,level_lord++,rejected_lord++,level_saffron,rejected_saffron,"
        "level_bh,rejected_bh");
  // The long form, keyed by rule and id: "level,rejected".
  std::map<std::string, std::string> expected;
  for (const auto& line : lines_of(lng.out)) {
    const auto f = split_commas(line);
    if (f.size() == 7 && f[0] != "rule") expected[f[0] + "/" + f[2]] = f[4] + "," + f[5];
  }
  REQUIRE(expected.size() == 3 * 420);
  const char* rules[] = {"lord++", "saffron", "bh"};
  std::size_t compared = 0;
  std::set<std::string> lines_seen;  // the file's lines 2..421, in the order of finished_at
  for (std::size_t i = 1; i < rows.size(); ++i) {
    const auto f = split_commas(rows[i]);
    REQUIRE(f.size() == 12);
    lines_seen.insert(f[0]);
    for (int k = 0; k < 3; ++k) {
      CHECK(expected[std::string(rules[k]) + "/" + f[1]] == f[6 + 2 * k] + "," + f[7 + 2 * k]);
      ++compared;
    }
  }
  CHECK(compared == 3 * 420);
  CHECK(lines_seen.size() == 420);
  // The input's own columns as written; rows in decision order (finished_at), with the file's line.
  CHECK(rows[1].rfind("415,LO-0414,0.6473863540862861,mobile-app,day7_retention,2024-01-01T00:43:45Z,", 0) == 0);
  CHECK(wide.out.find("\n2,LO-0001,0.28527458147820645,email,unsubscribe_rate,2025-12-12T23:19:44Z,") !=
        std::string::npos);

  // --rejected-only keeps the tests any rule rejected,
  // Counted from the long form instead of assumed.
  std::set<std::string> any;
  for (const auto& [key, value] : expected) {
    if (value.back() == '1') any.insert(key.substr(key.find('/') + 1));
  }
  const auto only = run_alphaledger({"replay", kDemo, "--rules", "lord++,saffron,bh", "--wide", "--rejected-only"});
  REQUIRE(only.exit_code == 0);
  const auto only_rows = lines_of(only.out);
  CHECK(only_rows.size() == 1 + any.size());
  for (std::size_t i = 1; i < only_rows.size(); ++i) CHECK(any.count(split_commas(only_rows[i])[1]) == 1);

  // --json: one object per test with the same keys and the long form's numbers.
  const auto json = run_alphaledger({"replay", kDemo, "--rules", "lord++,saffron,bh", "--wide", "--json"});
  REQUIRE(json.exit_code == 0);
  const auto objects = lines_of(json.out);
  REQUIRE(objects.size() == 420);
  CHECK(objects[0].rfind(R"({"line":415,"id":"LO-0414","p_value":0.6473863540862861,"team":"mobile-app",)", 0) == 0);
  const std::string& first = expected["lord++/LO-0414"];
  CHECK(objects[0].find(R"("level_lord++":)" + first.substr(0, first.find(',')) + R"(,"rejected_lord++":0)") !=
        std::string::npos);

  const auto both = run_alphaledger({"replay", kDemo, "--wide", "--summary"});
  CHECK(both.exit_code == 2);
  CHECK(both.err.find("--wide and --summary") != std::string::npos);
}
