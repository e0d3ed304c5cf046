// Several `serve` replicas on one PostgreSQL database (docs/postgresql.md "Running several
// replicas"): 8 clients decide on shared and distinct streams through two replicas, retrying on
// failures and resending ids; every acknowledged decision is in the history exactly once, at the
// step and level it was answered with, steps are contiguous and verify passes. The same while a
// replica is SIGKILLed and restarted, and while PostgreSQL itself is stopped at once and restarted.
// Then bad connections: clear errors, the documented exit codes, and never the password.
// Skipped without $ALPHALEDGER_TEST_PG (scripts/pg_cluster.sh, docs/testing.md "PostgreSQL").
#include <doctest/doctest.h>
#include <sys/stat.h>

#include <atomic>
#include <chrono>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <set>
#include <thread>

#include "support/http_post.hpp"
#include "support/pg.hpp"
#include "support/process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

namespace alphaledger {
namespace {

using test_support::BackgroundProcess;
using test_support::PgDatabase;
using test_support::run_alphaledger;
using test_support::TempDir;

constexpr int kClients = 8;
constexpr int kRequestsPerClient = 40;  // half on the shared stream, half on the client's own
constexpr auto kRequestDeadline = std::chrono::seconds(60);
const std::string kToken = "replica-test-token-5d1c";

std::vector<std::string> with_ledger(const std::string& ledger, std::vector<std::string> args) {
  args.insert(args.begin(), {"--ledger", ledger});
  return args;
}

std::string own_stream(int client) { return test_support::tag("own-", client); }

// What a client was told about one test.
struct Ack {
  std::string stream, id;
  double p_value = 0;
  std::uint64_t step = 0;
  double level = 0;
  int rejected = 0;
};

// `alphaledger --ledger LOCATION serve --listen 127.0.0.1:0 ...` in the background, waiting (at
// most 30 s) for the "listening" line that names the port it bound.
class ServeProcess {
 public:
  ServeProcess(const std::string& ledger, const std::string& log, const std::vector<std::string>& extra) {
    std::vector<std::string> args = {"--ledger", ledger, "serve", "--listen", "127.0.0.1:0"};
    args.insert(args.end(), extra.begin(), extra.end());
    child_ = std::make_unique<BackgroundProcess>(args, BackgroundProcess::Io{"/dev/null", log + ".out", log});
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(30);
    while (port_ == 0) {
      for (const auto& line : test_support::split_lines(test_support::read_file(log))) {
        auto j = nlohmann::json::parse(line, nullptr, false);
        if (!j.is_discarded() && j.is_object() && j.value("event", "") == "listening") {
          const std::string address = j.value("address", "");
          port_ = std::stoi(address.substr(address.rfind(':') + 1));
        }
      }
      if (port_ != 0) break;
      if (auto code = child_->wait(std::chrono::milliseconds(1))) {
        FAIL("serve exited with code " << *code << " before listening: " << test_support::read_file(log));
      }
      REQUIRE_MESSAGE(std::chrono::steady_clock::now() < deadline, "serve did not start within 30 s");
      std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
  }
  int port() const { return port_; }
  BackgroundProcess& child() { return *child_; }

 private:
  std::unique_ptr<BackgroundProcess> child_;
  int port_ = 0;
};

// Two serve replicas on one ledger; a replica may be killed and started again (new port) while
// clients run, so clients read the ports anew for each attempt.
class Replicas {
 public:
  Replicas(const std::string& ledger, TempDir& dir) : ledger_(ledger), dir_(dir) {
    token_file_ = dir.write("token", kToken + "\n");
    ::chmod(token_file_.c_str(), 0600);
    for (int r = 0; r < 2; ++r) start(r);
  }
  int port(int r) const { return ports_[r].load(); }
  void kill_and_restart(int r) {
    ports_[r] = 0;
    servers_[r]->child().signal(SIGKILL);
    servers_[r]->child().wait(std::chrono::seconds(10));
    std::this_thread::sleep_for(std::chrono::milliseconds(300));
    start(r);
  }
  std::string logs() const {
    std::string out;
    for (const auto& f : log_files_)
      out += test_support::concat(f, ":\n", test_support::read_file(f).substr(0, 4000), "\n");
    return out;
  }

 private:
  void start(int r) {
    const std::string log = dir_.file(
        test_support::concat(test_support::tag("replica-", r), "-", std::to_string(starts_++), ".log"));
    log_files_.push_back(log);
    servers_[r] = std::make_unique<ServeProcess>(
        ledger_, log, std::vector<std::string>{"--token-file", token_file_, "--access-log", "off"});
    ports_[r] = servers_[r]->port();
  }
  std::string ledger_, token_file_;
  TempDir& dir_;
  std::unique_ptr<ServeProcess> servers_[2];
  std::atomic<int> ports_[2] = {0, 0};
  int starts_ = 0;
  std::vector<std::string> log_files_;
};

// The client side of one run: what was acknowledged, what went wrong, how often a request was retried.
struct Run {
  std::mutex mu;
  std::vector<Ack> acks;
  std::vector<std::string> problems;
  std::atomic<int> acked{0};
  std::atomic<int> retries{0};
  std::atomic<int> unavailable{0};                    // 503 answers
  std::map<std::string, std::set<std::string>> sent;  // stream -> ids sent

  void problem(std::string text) {
    std::lock_guard lock(mu);
    if (problems.size() < 20) problems.push_back(std::move(text));
  }
};

// Sends one decision until a replica acknowledges it (201 new, 200 repeat), trying the replicas
// in turn. Connection errors and 5xx answers are retried; anything else is a problem.
std::optional<nlohmann::json> decide(Replicas& replicas, Run& run, int first_replica,
                                     const std::string& stream, const std::string& id, double p) {
  nlohmann::json body = {{"id", id}, {"p_value", p}};
  const auto deadline = std::chrono::steady_clock::now() + kRequestDeadline;
  for (int attempt = 0; std::chrono::steady_clock::now() < deadline; ++attempt) {
    if (attempt > 0) {
      ++run.retries;
      std::this_thread::sleep_for(std::chrono::milliseconds(std::min(20 * attempt, 250)));
    }
    const int port = replicas.port((first_replica + attempt) % 2);
    if (port == 0) continue;  // being restarted
    const auto res = test_support::http_post(port, test_support::concat("/v1/streams/", stream, "/tests"),
                                             body.dump(), kToken);
    if (res.status == 0) continue;  // refused, reset: the decision may or may not be made; resending is safe
    if (res.status == 503) ++run.unavailable;
    if (res.status >= 500) continue;
    if (res.status != 200 && res.status != 201) {
      run.problem(test_support::concat(stream, "/", id, ": HTTP ", std::to_string(res.status), " ",
                                       res.body.substr(0, 300)));
      return std::nullopt;
    }
    auto j = nlohmann::json::parse(res.body, nullptr, false);
    if (j.is_discarded() || !j.contains("step")) {
      run.problem(test_support::concat(stream, "/", id, ": not a decision: ", res.body.substr(0, 300)));
      return std::nullopt;
    }
    return j;
  }
  run.problem(test_support::concat(stream, "/", id, ": not acknowledged within 60 s"));
  return std::nullopt;
}

double p_value_of(int client, int i) {
  if (i % 6 == 0) return 0.0001 * (client + 1);  // a few small ones, so some are rejected
  return ((client * 131 + i * 71) % 997 + 1) / 998.0;
}

void client_loop(Replicas& replicas, Run& run, int client) {
  for (int i = 0; i < kRequestsPerClient; ++i) {
    const std::string stream = i % 2 == 0 ? "shared" : own_stream(client);
    const std::string id = test_support::concat(test_support::tag("c", client), "-", std::to_string(i));
    const double p = p_value_of(client, i);
    {
      std::lock_guard lock(run.mu);
      run.sent[stream].insert(id);
    }
    auto answer = decide(replicas, run, client + i, stream, id, p);
    if (!answer) continue;
    Ack ack{stream,
            id,
            p,
            (*answer)["step"].get<std::uint64_t>(),
            (*answer)["level"].get<double>(),
            (*answer)["rejected"].get<int>()};
    if (i % 4 == 1) {  // the same id again, through the other replica first: the same answer
      auto again = decide(replicas, run, client + i + 1, stream, id, p);
      if (again && ((*again)["repeat"] != true || (*again)["step"] != ack.step ||
                    (*again)["level"].get<double>() != ack.level || (*again)["rejected"] != ack.rejected)) {
        run.problem(test_support::concat(stream, "/", id, ": the resend answered ", again->dump(), ", first ",
                                         answer->dump()));
      }
    }
    std::lock_guard lock(run.mu);
    run.acks.push_back(std::move(ack));
    ++run.acked;
  }
}

// Every stream's history holds each sent id exactly once, each acknowledged one at the step and
// level it was answered with; steps are 1..n; verify passes.
void check_ledger(const std::string& ledger, Run& run) {
  INFO("problems: " << run.problems.size()
                    << (run.problems.empty() ? std::string()
                                             : test_support::concat(", first: ", run.problems[0])));
  CHECK(run.problems.empty());
  CHECK(run.acked.load() == kClients * kRequestsPerClient);
  std::map<std::string, std::map<std::string, nlohmann::json>> stored;  // stream -> id -> row
  for (const auto& [stream, ids] : run.sent) {
    auto history = run_alphaledger(with_ledger(ledger, {"history", stream, "--format", "jsonl"}));
    INFO(stream << ": " << history.err);
    REQUIRE(history.exit_code == 0);
    std::uint64_t step = 0;
    for (const auto& line : test_support::complete_lines(history.out)) {
      auto row = nlohmann::json::parse(line);
      ++step;
      CHECK(row["step"] == step);  // contiguous, from 1
      const std::string id = row["id"];
      CHECK_MESSAGE(stored[stream].emplace(id, row).second, "id " << id << " twice in " << stream);
      CHECK_MESSAGE(ids.count(id) == 1, "id " << id << " in " << stream << " was never sent there");
    }
    CHECK(stored[stream].size() == ids.size());  // every id sent is there (each was acknowledged)
    auto verified = run_alphaledger(with_ledger(ledger, {"verify", stream}));
    INFO(verified.out << verified.err);
    CHECK(verified.exit_code == 0);
  }
  for (const auto& ack : run.acks) {
    auto it = stored[ack.stream].find(ack.id);
    REQUIRE_MESSAGE(it != stored[ack.stream].end(), "acknowledged " << ack.id << " is not in " << ack.stream);
    CHECK(it->second["step"] == ack.step);
    CHECK(it->second["level"].get<double>() == ack.level);  // shortest round-trip text: same double
    CHECK(it->second["rejected"].get<int>() == ack.rejected);
  }
}

void make_streams(const std::string& ledger) {
  auto shared = run_alphaledger(with_ledger(ledger, {"new", "shared", "--rule", "lord++"}));
  INFO(shared.err);
  REQUIRE(shared.exit_code == 0);
  for (int c = 0; c < kClients; ++c) {
    REQUIRE(run_alphaledger(with_ledger(ledger, {"new", own_stream(c), "--rule", "saffron"})).exit_code == 0);
  }
}

// Runs the 8 clients; `disrupt` (if any) runs on this thread once a third of the decisions are in.
void run_clients(Replicas& replicas, Run& run, const std::function<void()>& disrupt = {}) {
  std::vector<std::thread> clients;
  for (int c = 0; c < kClients; ++c) clients.emplace_back([&, c] { client_loop(replicas, run, c); });
  if (disrupt) {
    const auto limit = std::chrono::steady_clock::now() + std::chrono::seconds(60);
    while (run.acked.load() < kClients * kRequestsPerClient / 3 && std::chrono::steady_clock::now() < limit) {
      std::this_thread::sleep_for(std::chrono::milliseconds(5));
    }
    disrupt();
  }
  for (auto& t : clients) t.join();
}

}  // namespace

TEST_CASE("PgReplicas: two replicas, 8 clients, shared and own streams, resends: each decision once") {
  auto admin = test_support::test_pg_uri();
  if (!admin) return;
  TempDir dir;
  PgDatabase db(*admin);
  make_streams(db.uri());
  Replicas replicas(db.uri(), dir);
  Run run;
  run_clients(replicas, run);
  INFO(replicas.logs());
  check_ledger(db.uri(), run);
}

TEST_CASE("PgReplicas: a replica SIGKILLed and restarted mid-run loses nothing acknowledged") {
  auto admin = test_support::test_pg_uri();
  if (!admin) return;
  TempDir dir;
  PgDatabase db(*admin);
  make_streams(db.uri());
  Replicas replicas(db.uri(), dir);
  Run run;
  int acked_at_kill = 0;
  run_clients(replicas, run, [&] {
    acked_at_kill = run.acked.load();
    replicas.kill_and_restart(0);
  });
  INFO(replicas.logs());
  CHECK(acked_at_kill < kClients * kRequestsPerClient);  // the kill came while clients were deciding
  check_ledger(db.uri(), run);
}

TEST_CASE("PgReplicas: PostgreSQL stopped at once and restarted mid-run: clients retry, nothing is lost") {
  if (!test_support::test_pg_uri()) return;
  TempDir dir;
  test_support::PrivateCluster cluster;  // its own server: stopping it disturbs no other test
  make_streams(cluster.uri());
  Replicas replicas(cluster.uri(), dir);
  Run run;
  bool halted = false, resumed = false;
  run_clients(replicas, run, [&] {
    halted = cluster.halt();
    std::this_thread::sleep_for(std::chrono::seconds(2));
    resumed = cluster.resume();
  });
  INFO(replicas.logs());
  REQUIRE(halted);
  REQUIRE(resumed);
  CHECK(run.retries.load() > 0);  // clients did see the outage
  check_ledger(cluster.uri(), run);
}

TEST_CASE("PgReplicas: bad connections give clear errors and exit codes, never the password") {
  auto admin = test_support::test_pg_uri();
  if (!admin) return;
  PgDatabase db(*admin);
  const std::string password = test_support::uri_password(db.uri());
  REQUIRE(password.size() >= 8);
  auto no_secret = [&](const test_support::ProcessResult& r, const std::string& secret) {
    CHECK(r.out.find(secret) == std::string::npos);
    CHECK(r.err.find(secret) == std::string::npos);
  };
  auto replace = [](std::string s, const std::string& from, const std::string& to) {
    return s.replace(s.find(from), from.size(), to);
  };

  SUBCASE("a database without the schema: no ledger there, exit 3") {
    auto status = run_alphaledger(with_ledger(db.uri(), {"status", "s"}));
    INFO(status.err);
    CHECK(status.exit_code == 3);
    CHECK(status.err.find("no ledger at") != std::string::npos);
    no_secret(status, password);
  }
  SUBCASE("an unreachable server (a closed port): storage error, exit 4") {
    const auto at = db.uri().find('@');
    const auto slash = db.uri().find('/', at);
    const std::string closed =
        test_support::concat(db.uri().substr(0, at + 1), "127.0.0.1:1", db.uri().substr(slash));
    auto status = run_alphaledger(with_ledger(closed, {"status", "s"}));
    INFO(status.err);
    CHECK(status.exit_code == 4);
    CHECK(status.err.find("127.0.0.1") != std::string::npos);  // says where it tried
    no_secret(status, password);
  }
  SUBCASE("a wrong password: storage error, exit 4, neither password printed") {
    const std::string wrong_password = test_support::concat("Wr0ng-", password.substr(0, 6));
    auto status = run_alphaledger(with_ledger(replace(db.uri(), password, wrong_password), {"status", "s"}));
    INFO(status.err);
    CHECK(status.exit_code == 4);
    CHECK(status.err.find("password") != std::string::npos);  // says what failed
    no_secret(status, password);
    no_secret(status, wrong_password);
  }
  SUBCASE("a read-only user: reads work, `new` is refused with exit 4") {
    const std::string ro = test_support::env_or_empty("ALPHALEDGER_TEST_PG_RO");
    if (ro.empty()) {
      MESSAGE("skipped: no $ALPHALEDGER_TEST_PG_RO (scripts/pg_cluster.sh makes the read-only role)");
      return;
    }
    REQUIRE(run_alphaledger(with_ledger(db.uri(), {"new", "s", "--rule", "lord++"})).exit_code == 0);
    const std::string ro_uri = test_support::uri_with_database(ro, db.name());
    const std::string ro_password = test_support::uri_password(ro_uri);
    auto status = run_alphaledger(with_ledger(ro_uri, {"status", "s"}));
    INFO(status.err);
    CHECK(status.exit_code == 0);
    auto created = run_alphaledger(with_ledger(ro_uri, {"new", "t", "--rule", "lord++"}));
    INFO(created.err);
    CHECK(created.exit_code == 4);
    CHECK_FALSE(created.err.empty());
    no_secret(created, ro_password);
    no_secret(status, ro_password);
    CHECK(run_alphaledger(with_ledger(db.uri(), {"status", "t"})).exit_code == 3);  // nothing was created
  }
}

}  // namespace alphaledger
