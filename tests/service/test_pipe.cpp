// `alphaledger pipe`: one answer per line, in order, durable before printed, bad lines answered
// and skipped, SIGTERM finishing what was read. Most checks drive the real binary.
#include <doctest/doctest.h>
#include <fcntl.h>

#include <nlohmann/json.hpp>

#include <cmath>
#include <map>
#include <random>

#include "alphaledger/service.hpp"
#include "alphaledger/store.hpp"
#include "service/json_input.hpp"
#include "support/history_check.hpp"
#include "support/process.hpp"
#include "support/server_process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"
#include "store/faulty_store.hpp"

namespace alphaledger {
namespace {

using test_support::BackgroundProcess;
using test_support::read_file;
using test_support::split_lines;
using test_support::TempDir;
using test_support::write_file;

void create_stream_on_disk(const std::string& ledger_dir, const std::string& name, const RuleSpec& spec) {
  auto ledger = Ledger::open(ledger_dir);
  REQUIRE_MESSAGE(ledger.ok(), (ledger.ok() ? "" : ledger.error().message));
  auto config = resolve_config(spec);
  REQUIRE(config.ok());
  REQUIRE((*ledger)->create_stream(name, *config).ok());
}

std::vector<DecisionRecord> history_on_disk(const std::string& ledger_dir, const std::string& name,
                                            RuleConfig* config = nullptr, bool verify = true) {
  auto ledger = Ledger::open(ledger_dir);
  REQUIRE_MESSAGE(ledger.ok(), (ledger.ok() ? "" : ledger.error().message));
  auto h = (*ledger)->history(name);
  REQUIRE(h.ok());
  if (config != nullptr) {
    auto s = (*ledger)->status(name);
    REQUIRE(s.ok());
    *config = s->config;
  }
  if (verify) {
    auto v = (*ledger)->verify(name);
    REQUIRE(v.ok());
    CHECK_MESSAGE(v->ok, "verify: step " << v->first_bad_step << ": " << v->problem);
    CHECK(v->steps == h->size());
  }
  return *h;
}

std::string test_line(const std::string& id, double p) {
  nlohmann::json j;
  j["id"] = id;
  j["p_value"] = p;
  return j.dump();
}

TEST_CASE(
    "Pipe: 10,000 lines with bad lines mixed in get one answer each, in order, and the history equals replay "
    "of the good lines") {
  const std::uint64_t seed = 20250314;
  INFO("seed " << seed);
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> unif(0.0, 1.0);
  TempDir dir;
  const std::string db = dir.file("db");
  create_stream_on_disk(db, "monitor", RuleSpec{.rule = "saffron"});

  // What each line should get back.
  struct Expect {
    enum Kind { kDecision, kRepeat, kBad } kind;
    std::string id;
    double p = 0;
  };
  std::vector<Expect> expect;
  std::vector<std::pair<std::string, double>> good;  // first-time tests, in order
  std::string input;
  const int kLines = 10000;
  for (int k = 1; k <= kLines; ++k) {
    const double u = unif(rng);
    if (u < 0.08) {
      const int which = static_cast<int>(unif(rng) * 9);
      std::string line;
      switch (which) {
        case 0:
          line = R"({"id": "broken)";
          break;  // malformed JSON
        case 1:
          line = "";
          break;  // blank line
        case 2:
          line = "[1, 2]";
          break;  // not an object
        case 3:
          line = R"({"id": ")" + test_support::tag("m", k) + R"("})";
          break;  // no p_value
        case 4:
          line = R"({"id": ")" + test_support::tag("r", k) + R"(", "p_value": 1.5})";
          break;  // out of range
        case 5:
          line = R"({"id": ")" + test_support::tag("s", k) + R"(", "p_value": "0.01"})";
          break;  // wrong type
        case 6:
          line = R"({"id": "", "p_value": 0.01})";
          break;  // empty id
        case 7:
          line = R"({"p_value": 0.01})";
          break;  // no id
        default:
          if (good.empty()) {
            line = "null";
          } else {  // a conflict: a decided id with another p-value
            const auto& g = good[static_cast<std::size_t>(unif(rng) * static_cast<double>(good.size()))];
            line = test_line(g.first, g.second == 0.5 ? 0.25 : 0.5);
          }
      }
      input += line + "\n";
      expect.push_back({Expect::kBad, "", 0});
    } else if (u < 0.11 && !good.empty()) {  // a retry of a decided test
      const auto& g = good[static_cast<std::size_t>(unif(rng) * static_cast<double>(good.size()))];
      input += test_line(g.first, g.second) + "\n";
      expect.push_back({Expect::kRepeat, g.first, g.second});
    } else {
      // Mostly nulls (uniform), some strong signals.
      const double p = unif(rng) < 0.1 ? std::pow(unif(rng), 4) * 1e-3 : unif(rng);
      const std::string id = test_support::tag("t", k);
      input += test_line(id, p) + (k == kLines ? "" : "\n");  // the last line has no newline
      expect.push_back({Expect::kDecision, id, p});
      good.emplace_back(id, p);
    }
  }
  write_file(dir.file("in.jsonl"), input);

  BackgroundProcess child({"--ledger", db, "pipe", "monitor"},
              {dir.file("in.jsonl"), dir.file("out.jsonl"), dir.file("err.txt")});
  const auto code = child.wait(std::chrono::seconds(120));
  REQUIRE(code.has_value());
  const std::string err = read_file(dir.file("err.txt"));
  CHECK_MESSAGE(*code == 2, "exit code " << *code << "; stderr: " << err);  // some lines were bad
  CHECK(err.find("lines were refused") != std::string::npos);

  const auto answers = split_lines(read_file(dir.file("out.jsonl")));
  REQUIRE(answers.size() == expect.size());
  std::map<std::string, std::uint64_t> step_of;
  std::uint64_t next_step = 1;
  int mismatches = 0;
  for (std::size_t k = 0; k < answers.size() && mismatches < 5; ++k) {
    INFO("line " << k + 1 << ": " << answers[k]);
    auto j = nlohmann::json::parse(answers[k], nullptr, false);
    REQUIRE(j.is_object());
    const Expect& e = expect[k];
    if (e.kind == Expect::kBad) {
      const bool ok =
          j.value("line", 0ULL) == k + 1 && j.contains("error") && !j["error"].get<std::string>().empty();
      CHECK(ok);
      mismatches += ok ? 0 : 1;
      continue;
    }
    const bool ok = j.value("id", "") == e.id && j.value("p_value", -1.0) == e.p &&
                    j.value("repeat", !(e.kind == Expect::kRepeat)) == (e.kind == Expect::kRepeat) &&
                    j.value("stream", "") == "monitor";
    CHECK(ok);
    mismatches += ok ? 0 : 1;
    if (e.kind == Expect::kDecision) {
      CHECK(j.value("step", 0ULL) == next_step);
      step_of[e.id] = next_step++;
    } else {
      CHECK(j.value("step", 0ULL) == step_of[e.id]);  // the stored decision comes back
    }
  }

  RuleConfig config;
  const auto history = history_on_disk(db, "monitor", &config);
  REQUIRE(history.size() == good.size());
  for (std::size_t k = 0; k < good.size(); ++k) {
    INFO("step " << k + 1);
    CHECK(history[k].id == good[k].first);
    CHECK(history[k].p_value == good[k].second);
  }
  test_support::check_history_equals_replay(history, config);
}

TEST_CASE("Pipe: LORD++ levels and decisions equal the check values of docs/methods.md 14.3") {
  // Source: docs/methods.md section 14.3 (LORD++ as displayed in Ramdas et al. 2017,
  // "Online control of the false discovery rate with decaying memory", section 5.2; W0 = alpha/2,
  // Javanmard-Montanari gamma, alpha = 0.05), 10 significant digits.
  const double p[10] = {0.0004, 0.0012, 0.36, 0.0009, 0.78, 0.0032, 0.17, 0.0011, 0.44, 0.0100};
  const double level[10] = {0.001370386057, 0.0016684017,  0.003292613799, 0.001060948593,  0.00363847711,
                            0.001351990812, 0.00115660396, 0.000989535854, 0.0008614799781, 0.0007620915508};
  const int rejected[10] = {1, 1, 0, 1, 0, 0, 0, 0, 0, 0};
  TempDir dir;
  const std::string db = dir.file("db");
  create_stream_on_disk(db, "check-values", RuleSpec{.rule = "lord++"});
  std::string input;
  for (int t = 0; t < 10; ++t) input += test_line(test_support::tag("t", t + 1), p[t]) + "\n";
  write_file(dir.file("in.jsonl"), input);
  BackgroundProcess child({"--ledger", db, "pipe", "check-values"},
              {dir.file("in.jsonl"), dir.file("out.jsonl"), dir.file("err.txt")});
  const auto code = child.wait();
  REQUIRE(code.has_value());
  CHECK_MESSAGE(*code == 0, read_file(dir.file("err.txt")));
  const auto answers = split_lines(read_file(dir.file("out.jsonl")));
  REQUIRE(answers.size() == 10);
  for (int t = 0; t < 10; ++t) {
    INFO("t = " << t + 1 << ": " << answers[static_cast<std::size_t>(t)]);
    auto j = nlohmann::json::parse(answers[static_cast<std::size_t>(t)]);
    CHECK(j["step"].get<int>() == t + 1);
    CHECK(j["level"].get<double>() == doctest::Approx(level[t]).epsilon(1e-9));
    CHECK(j["rejected"].get<int>() == rejected[t]);
  }
}

TEST_CASE(
    "Pipe: SIGTERM answers every line already read, then exits 0; the history holds exactly the answered "
    "tests") {
  TempDir dir;
  const std::string db = dir.file("db");
  create_stream_on_disk(db, "live", RuleSpec{.rule = "lord++"});
  BackgroundProcess child({"--ledger", db, "pipe", "live"}, {std::nullopt, dir.file("out.jsonl"), dir.file("err.txt")});
  std::string batch;
  for (int k = 1; k <= 40; ++k) batch += test_line(test_support::tag("a", k), 0.5) + "\n";
  child.write_stdin(batch);
  // Wait (bounded) until all 40 answers are out, so the process sits idle reading stdin.
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(30);
  while (split_lines(read_file(dir.file("out.jsonl"))).size() < 40) {
    REQUIRE_MESSAGE(std::chrono::steady_clock::now() < deadline, "40 answers did not arrive within 30 s");
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  // More lines, then SIGTERM straight away; stdin stays open, so only the signal ends the run.
  batch.clear();
  for (int k = 41; k <= 60; ++k) batch += test_line(test_support::tag("a", k), 0.5) + "\n";
  child.write_stdin(batch + R"({"id": "half-written)");
  child.signal(SIGTERM);
  const auto code = child.wait(std::chrono::seconds(30));
  REQUIRE_MESSAGE(code.has_value(), "pipe did not exit within 30 s of SIGTERM");
  CHECK_MESSAGE(*code == 0, read_file(dir.file("err.txt")));
  const auto answers = split_lines(read_file(dir.file("out.jsonl")));
  CHECK(answers.size() >= 40);
  CHECK(answers.size() <= 60);  // the unterminated line is never answered
  const auto history = history_on_disk(db, "live");
  REQUIRE(history.size() == answers.size());  // nothing decided unanswered, nothing answered undecided
  for (std::size_t k = 0; k < answers.size(); ++k) {
    CHECK(nlohmann::json::parse(answers[k])["id"].get<std::string>() == history[k].id);
  }
}

TEST_CASE("Pipe: an unknown stream is refused with exit 3 before any line is read") {
  TempDir dir;
  const std::string db = dir.file("db");
  create_stream_on_disk(db, "exists", RuleSpec{.rule = "lord++"});
  write_file(dir.file("in.jsonl"), test_line("x", 0.1) + "\n");
  BackgroundProcess child({"--ledger", db, "pipe", "missing"},
              {dir.file("in.jsonl"), dir.file("out.jsonl"), dir.file("err.txt")});
  const auto code = child.wait();
  REQUIRE(code.has_value());
  CHECK(*code == 3);
  CHECK(read_file(dir.file("out.jsonl")).empty());
  CHECK(read_file(dir.file("err.txt")).find("missing") != std::string::npos);
}

// ---- in process, over the in-memory and fault-injecting stores ---------------------------------

struct PipeFixture {
  MemoryStore memory;
  FaultyStore faulty{memory};
  std::unique_ptr<Ledger> ledger;
  TempDir dir;
  PipeFixture() {
    auto l = Ledger::open(borrow_store(faulty), [] { return std::int64_t{1700000000000}; });
    REQUIRE(l.ok());
    ledger = std::move(l).value();
    REQUIRE(ledger->create_stream("s", *resolve_config(RuleSpec{.rule = "lord++"})).ok());
  }
  // Runs the pipe over `input` (a file) and returns the answers.
  std::pair<Result<PipeSummary>, std::vector<std::string>> run(const std::string& input) {
    write_file(dir.file("in"), input);
    const int fd = ::open(dir.file("in").c_str(), O_RDONLY);
    REQUIRE(fd >= 0);
    std::ostringstream out;
    auto summary = run_pipe(*ledger, "s", fd, out);
    ::close(fd);
    return {std::move(summary), split_lines(out.str())};
  }
};

TEST_CASE("Pipe: blank, over-long and unterminated lines are each answered once with their line number") {
  PipeFixture f;
  const std::string long_line(kMaxPipeLineBytes + 10, 'x');
  auto [summary, answers] =
      f.run("\n" + long_line + "\n" + test_line("a", 0.2) + "\n  \r\n" + test_line("b", 0.3));
  REQUIRE(summary.ok());
  CHECK(summary->lines == 5);
  CHECK(summary->bad == 3);
  CHECK(summary->decided == 2);
  REQUIRE(answers.size() == 5);
  CHECK(nlohmann::json::parse(answers[0])["line"] == 1);
  CHECK(nlohmann::json::parse(answers[1])["line"] == 2);
  CHECK(nlohmann::json::parse(answers[1])["error"].get<std::string>().find("longer than") !=
        std::string::npos);
  CHECK(nlohmann::json::parse(answers[2])["id"] == "a");
  CHECK(nlohmann::json::parse(answers[3])["line"] == 4);
  CHECK(nlohmann::json::parse(answers[4])["id"] == "b");
}

TEST_CASE(
    "Pipe: a repeat inside one group returns the stored decision; a conflict is answered and the group goes "
    "on") {
  PipeFixture f;
  auto [summary, answers] = f.run(test_line("a", 0.2) + "\n" + test_line("a", 0.2) + "\n" +
                                  test_line("a", 0.9) + "\n" + test_line("b", 0.0001) + "\n");
  REQUIRE(summary.ok());
  REQUIRE(answers.size() == 4);
  auto a1 = nlohmann::json::parse(answers[0]), a2 = nlohmann::json::parse(answers[1]);
  CHECK(a1["repeat"] == false);
  CHECK(a2["repeat"] == true);
  CHECK(a1["step"] == a2["step"]);
  CHECK(a1["level"] == a2["level"]);
  auto conflict = nlohmann::json::parse(answers[2]);
  CHECK(conflict["line"] == 3);
  CHECK(conflict["error"].get<std::string>().find("already decided") != std::string::npos);
  CHECK(nlohmann::json::parse(answers[3])["step"] == 2);
  CHECK(summary->bad == 1);
  CHECK(summary->repeats == 1);
}

TEST_CASE("Pipe: a storage failure answers the line it hit, stops, and nothing unanswered is decided") {
  PipeFixture f;
  REQUIRE(f.ledger->decide("s", "before", 0.3).ok());
  f.faulty.fail_all_writes("No space left on device");
  const auto before = copy_contents(f.memory);
  auto [summary, answers] = f.run(test_line("a", 0.2) + "\n" + test_line("b", 0.3) + "\n");
  REQUIRE_FALSE(summary.ok());
  CHECK(summary.error().kind == ErrorKind::kIOError);
  REQUIRE(answers.size() == 1);
  auto j = nlohmann::json::parse(answers[0]);
  CHECK(j["line"] == 1);
  CHECK(j["error"].get<std::string>().find("No space left") != std::string::npos);
  CHECK(copy_contents(f.memory) == before);  // the ledger is as it was
}

// ---- one meaning for each input: pipe lines read as JSON Lines rows are (docs/formats.md) -------

TEST_CASE("Pipe: a line nested 200,000 deep is answered with an error and the next line is decided") {
  PipeFixture f;
  const std::string deep = std::string(200000, '[') + std::string(200000, ']');
  auto [summary, answers] = f.run(std::string(R"({"id": "x", "p_value": 0.1, "extra": )")
                                      .append(deep)
                                      .append("}\n")
                                      .append(test_line("b", 0.3))
                                      .append("\n"));
  REQUIRE(summary.ok());
  REQUIRE(answers.size() == 2);
  auto first = nlohmann::json::parse(answers[0]);
  CHECK(first["error"].get<std::string>().find("nested deeper") != std::string::npos);
  CHECK(answers[0].size() < 400);
  CHECK(nlohmann::json::parse(answers[1])["id"] == "b");
}

TEST_CASE("Pipe: 1e-400 is refused, -0 is stored as 0, and NaN, duplicate keys and bad ids are named") {
  PipeFixture f;
  auto [summary, answers] = f.run(
      "{\"id\": \"tiny\", \"p_value\": 1e-400}\n"
      "{\"id\": \"zero\", \"p_value\": -0.0}\n"
      "{\"id\": \"nan\", \"p_value\": NaN}\n"
      "{\"id\": \"dup\", \"p_value\": 0.1, \"p_value\": 0.9}\n"
      "{\"id\": \" padded\", \"p_value\": 0.1}\n"
      "{\"id\": 1.5, \"p_value\": 0.1}\n");
  REQUIRE(summary.ok());
  REQUIRE(answers.size() == 6);
  auto error_of = [&](std::size_t k) {
    auto j = nlohmann::json::parse(answers[k]);
    return j.contains("error") ? j["error"].get<std::string>() : std::string();
  };
  CHECK(error_of(0).find("too small") != std::string::npos);
  CHECK(error_of(1).empty());
  CHECK(error_of(2).find("not a JSON number") != std::string::npos);
  CHECK(error_of(3).find("'p_value' appears twice") != std::string::npos);
  CHECK(error_of(4).find("white space") != std::string::npos);
  CHECK(error_of(5).find("id must be a JSON string") != std::string::npos);
  auto h = f.ledger->history("s");
  REQUIRE(h.ok());
  REQUIRE(h->size() == 1);
  CHECK(h->at(0).id == "zero");
  CHECK_FALSE(std::signbit(h->at(0).p_value));
}

TEST_CASE("Pipe: lines may end with LF, CRLF or a lone CR, also when a CRLF is split between reads") {
  PipeFixture f;
  auto [summary, answers] =
      f.run(test_line("a", 0.2) + "\r" + test_line("b", 0.3) + "\r\n" + test_line("c", 0.4) + "\n");
  REQUIRE(summary.ok());
  CHECK(summary->bad == 0);
  CHECK(answers.size() == 3);

  // CR at the end of one read, LF at the start of the next: one line end, not two.
  int fds[2];
  REQUIRE(::pipe(fds) == 0);
  std::thread writer([&] {
    const std::string first = test_line("d", 0.5) + "\r";
    const std::string second = std::string("\n").append(test_line("e", 0.6)).append("\n");
    CHECK(::write(fds[1], first.data(), first.size()) == static_cast<ssize_t>(first.size()));
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
    CHECK(::write(fds[1], second.data(), second.size()) == static_cast<ssize_t>(second.size()));
    ::close(fds[1]);
  });
  std::ostringstream out;
  auto split = run_pipe(*f.ledger, "s", fds[0], out);
  writer.join();
  ::close(fds[0]);
  REQUIRE(split.ok());
  CHECK(split->bad == 0);
  CHECK(split_lines(out.str()).size() == 2);
}

TEST_CASE("Pipe: summary rows are decided in the stream's frozen direction") {
  PipeFixture f;
  REQUIRE(
      f.ledger
          ->create_stream_directed("up", *resolve_config(RuleSpec{.rule = "lord++"}), Alternative::kGreater)
          .ok());
  const std::map<std::string, std::string> counts = {{"control_n", "1000"},
                                                     {"control_conversions", "50"},
                                                     {"treatment_n", "1000"},
                                                     {"treatment_conversions", "70"}};
  // The p-value the statistics layer gives these counts (pooled z-test, docs/statistics.md).
  auto greater = p_value_from_summary(counts, Alternative::kGreater);
  auto two_sided = p_value_from_summary(counts, Alternative::kTwoSided);
  REQUIRE(greater.ok());
  REQUIRE(two_sided.ok());
  REQUIRE(*greater != *two_sided);
  const std::string row =
      R"({"id": "counts", "control_n": 1000, "control_conversions": 50, "treatment_n": 1000, "treatment_conversions": "70"})";
  write_file(f.dir.file("in"), row + "\n");
  const int fd = ::open(f.dir.file("in").c_str(), O_RDONLY);
  REQUIRE(fd >= 0);
  std::ostringstream out;
  auto summary = run_pipe(*f.ledger, "up", fd, out);
  ::close(fd);
  REQUIRE(summary.ok());
  CHECK(summary->decided == 1);
  auto answer = nlohmann::json::parse(split_lines(out.str()).at(0));
  CHECK(answer["p_value"].get<double>() == *greater);
}

TEST_CASE(
    "test_from_json: one reading with the JSON Lines reader; the single-argument form takes p_value only") {
  const auto j = nlohmann::json::parse(R"({"id": 7, "p_value": 0.25, "finished_at": "2025-01-01"})");
  auto t = test_from_json(j);
  REQUIRE(t.ok());
  CHECK(t->id == "7");
  CHECK(t->p_value == 0.25);
  // A bad finished_at is refused here too, as in a log (one meaning for each key).
  CHECK_FALSE(
      test_from_json(nlohmann::json::parse(R"({"id": "a", "p_value": 0.25, "finished_at": "soon"})")).ok());
  const auto counts = nlohmann::json::parse(
      R"({"id": "c", "control_n": 1000, "control_conversions": 50, "treatment_n": 1000, "treatment_conversions": 70})");
  CHECK_FALSE(test_from_json(counts).ok());
  CHECK(test_from_json(counts, Alternative::kTwoSided).ok());
}

TEST_CASE("stream_request_from_json: known keys with one type each; unknown keys refused by name") {
  auto ok =
      stream_request_from_json(nlohmann::json::parse(R"({"name": "s1", "rule": "saffron", "alpha": -0.0})"));
  REQUIRE(ok.ok());
  CHECK(ok->name == "s1");
  CHECK(ok->spec.rule == "saffron");
  REQUIRE(ok->spec.alpha.has_value());
  CHECK_FALSE(std::signbit(*ok->spec.alpha));
  auto unknown =
      stream_request_from_json(nlohmann::json::parse(R"({"name": "s1", "rule": "lond", "alhpa": 0.1})"));
  REQUIRE_FALSE(unknown.ok());
  CHECK(unknown.error().message.find("'alhpa'") != std::string::npos);
  CHECK_FALSE(
      stream_request_from_json(nlohmann::json::parse(R"({"name": "s1", "rule": "lond", "alpha": "0.1"})"))
          .ok());
  CHECK_FALSE(stream_request_from_json(nlohmann::json::parse(R"({"rule": "lond"})")).ok());
  const std::string long_key(100000, 'k');
  auto big = stream_request_from_json(nlohmann::json{{long_key, 1}});
  REQUIRE_FALSE(big.ok());
  CHECK(big.error().message.size() < 400);
}

TEST_CASE("replay reads standard input when the file is '-'") {
  TempDir dir;
  write_file(dir.file("in.csv"), "id,p_value\ra,0.001\rb,0.5\r");  // CR-only line ends, too
  BackgroundProcess child({"replay", "-", "--format", "csv"},
              {dir.file("in.csv"), dir.file("out.csv"), dir.file("err.txt")});
  const auto code = child.wait();
  REQUIRE(code.has_value());
  CHECK_MESSAGE(*code == 0, read_file(dir.file("err.txt")));
  const auto lines = split_lines(read_file(dir.file("out.csv")));
  REQUIRE(lines.size() == 3);  // the header and two rows
  CHECK(lines[1].find(",a,") != std::string::npos);
  CHECK(lines[2].find(",b,") != std::string::npos);
}


// Launch and abandon lines (docs/http.md "Launch and abandon lines"): answered in order with the
// forms of launch --json and abandon --json; a decide of a launched id uses the reserved level
// (docs/methods.md 9.1: the level is fixed at launch); retries are repeats; refusals name the line.
TEST_CASE("Pipe: launch and abandon events, finishing at the reserved level, in input order") {
  PipeFixture f;
  const std::string input = std::string(R"({"event":"launch","id":"e1"})") + "\n" +
                            R"({"event":"launch","id":"e2"})" + "\n" + test_line("n1", 0.0001) + "\n" +
                            test_line("e1", 0.0002) + "\n" + R"({"event":"abandon","id":"e2"})" + "\n" +
                            R"({"event":"launch","id":"e1"})" + "\n" + R"({"event":"abandon","id":"zz"})" +
                            "\n" + R"({"event":"stop","id":"e3"})" + "\n" + R"({"event":"abandon","id":"e2"})" +
                            "\n";
  auto [summary, answers] = f.run(input);
  REQUIRE(summary.ok());
  REQUIRE(answers.size() == 9);
  const auto e1 = nlohmann::json::parse(answers[0]);
  CHECK(e1["launch"] == 1);
  CHECK(e1["repeat"] == false);
  const auto n1 = nlohmann::json::parse(answers[2]);
  CHECK(n1["launch"] == 3);
  const auto d1 = nlohmann::json::parse(answers[3]);
  CHECK(d1["id"] == "e1");
  CHECK(d1["level"].get<double>() == e1["level"].get<double>());
  CHECK(d1["launch"] == 1);
  CHECK(nlohmann::json::parse(answers[4])["abandoned_at"].is_string());
  CHECK(answers[5].find("\"line\":6") != std::string::npos);  // e1 was decided: no second launch
  CHECK(answers[6].find("\"line\":7") != std::string::npos);  // zz never launched
  CHECK(answers[6].find("zz") != std::string::npos);
  CHECK(answers[7].find("unknown event") != std::string::npos);
  CHECK(nlohmann::json::parse(answers[8])["repeat"] == true);
  CHECK(summary->bad == 3);
  auto v = f.ledger->verify("s");
  REQUIRE(v.ok());
  CHECK(v->ok);
  auto status = f.ledger->status("s");
  CHECK(status->running == 0);
}


// Ids on launch and abandon lines are read as on decide lines (docs/formats.md "id"): a JSON
// integer is its decimal text, so {"event":"launch","id":42} and {"id":"42",...} name one test; a
// float, boolean or null id is refused with the line number. The summary counts launches and
// abandons apart from decisions (include/alphaledger/service.hpp PipeSummary).
TEST_CASE("Pipe: integer ids on launch and abandon lines, and the summary counts each event") {
  PipeFixture f;
  const std::string input = std::string(R"({"event":"launch","id":42})") + "\n" +  // 1 launch "42"
                            R"({"event":"launch","id":"43"})" + "\n" +             // 2 launch "43"
                            R"({"id":42,"p_value":0.0001})" + "\n" +               // 3 finish "42"
                            R"({"event":"abandon","id":43})" + "\n" +              // 4 abandon "43"
                            R"({"event":"launch","id":-7})" + "\n" +               // 5 launch "-7"
                            R"({"event":"launch","id":"-7"})" + "\n" +             // 6 repeat
                            R"({"event":"abandon","id":"43"})" + "\n" +            // 7 repeat
                            test_line("d1", 0.3) + "\n" +                          // 8 decide
                            R"({"event":"launch","id":4.5})" + "\n" +              // 9 refused
                            R"({"event":"abandon","id":true})" + "\n" +            // 10 refused
                            R"({"event":"launch","id":null})" + "\n";              // 11 refused
  auto [summary, answers] = f.run(input);
  REQUIRE(summary.ok());
  REQUIRE(answers.size() == 11);
  const auto l42 = nlohmann::json::parse(answers[0]);
  CHECK(l42["id"] == "42");
  CHECK(l42["repeat"] == false);
  const auto d42 = nlohmann::json::parse(answers[2]);
  CHECK(d42["id"] == "42");
  CHECK(d42["launch"] == l42["launch"]);  // the finish of the test launched as 42
  CHECK(d42["level"].get<double>() == l42["level"].get<double>());
  const auto a43 = nlohmann::json::parse(answers[3]);
  CHECK(a43["id"] == "43");
  CHECK(a43["abandoned_at"].is_string());
  CHECK(nlohmann::json::parse(answers[4])["id"] == "-7");
  CHECK(nlohmann::json::parse(answers[5])["repeat"] == true);
  CHECK(nlohmann::json::parse(answers[6])["repeat"] == true);
  for (std::size_t k : {8u, 9u, 10u}) {
    const auto e = nlohmann::json::parse(answers[k]);
    CHECK(e["line"] == k + 1);
    CHECK(e["error"].get<std::string>().find("id must be a JSON string (or an integer)") !=
          std::string::npos);
  }
  CHECK(summary->lines == 11);
  CHECK(summary->decided == 2);    // lines 3 and 8
  CHECK(summary->launched == 3);   // lines 1, 2 and 5 (the one abandoned later still launched)
  CHECK(summary->abandoned == 1);  // line 4
  CHECK(summary->repeats == 2);
  CHECK(summary->bad == 3);
  CHECK(summary->decided + summary->launched + summary->abandoned + summary->repeats + summary->bad ==
        summary->lines);
  auto running = f.ledger->running("s");
  REQUIRE(running.ok());
  REQUIRE(running->size() == 1);
  CHECK((*running)[0].id == "-7");
}

}  // namespace
}  // namespace alphaledger
