// `alphaledger serve`: the real binary on a free loopback port, driven by httplib clients.
#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <httplib.h>
#include <netinet/in.h>
#include <sys/socket.h>

#include <atomic>
#include <mutex>
#include <random>
#include <thread>

#include "alphaledger/ledger.hpp"
#include "support/history_check.hpp"
#include "support/process.hpp"
#include "support/server_process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

namespace alphaledger {
namespace {

using test_support::BackgroundProcess;
using test_support::read_file;
using test_support::ServerProcess;
using test_support::TempDir;
using test_support::write_file;

struct Reply {
  int status = 0;       // 0: no response (connection failed)
  nlohmann::json body;  // parsed, or discarded when not JSON
  std::string raw;
  std::string www_authenticate;
};

class Api {
 public:
  explicit Api(int port, std::string token = {}) : client_("127.0.0.1", port), token_(std::move(token)) {
    client_.set_connection_timeout(5, 0);
    client_.set_read_timeout(30, 0);
    client_.set_write_timeout(30, 0);
    client_.set_keep_alive(true);
    client_.set_tcp_nodelay(true);  // headers and body go out in separate writes
  }
  Reply get(const std::string& path, std::optional<std::string> auth = std::nullopt) {
    return wrap(client_.Get(path.c_str(), headers(auth)));
  }
  Reply post(const std::string& path, const std::string& body,
             std::optional<std::string> auth = std::nullopt) {
    return wrap(client_.Post(path.c_str(), headers(auth), body, "application/json"));
  }
  // Closes the keep-alive connection (a stopping server waits for idle ones until they time out).
  void close() { client_.stop(); }
  Reply del(const std::string& path) { return wrap(client_.Delete(path.c_str(), headers(std::nullopt))); }
  Reply decide(const std::string& stream, const std::string& id, double p) {
    nlohmann::json j;
    j["id"] = id;
    j["p_value"] = p;
    return post("/v1/streams/" + stream + "/tests", j.dump());
  }
  Reply create(const std::string& name, const std::string& rule) {
    return post("/v1/streams", nlohmann::json{{"name", name}, {"rule", rule}}.dump());
  }

 private:
  // auth: nullopt = the right token (if any); "" = no header; otherwise the header value.
  httplib::Headers headers(const std::optional<std::string>& auth) const {
    httplib::Headers h;
    if (!auth) {
      if (!token_.empty()) h.emplace("Authorization", "Bearer " + token_);
    } else if (!auth->empty()) {
      h.emplace("Authorization", *auth);
    }
    return h;
  }
  static Reply wrap(const httplib::Result& r) {
    Reply out;
    if (!r) return out;
    out.status = r->status;
    out.raw = r->body;
    out.body = nlohmann::json::parse(r->body, nullptr, false);
    out.www_authenticate = r->get_header_value("WWW-Authenticate");
    return out;
  }
  httplib::Client client_;
  std::string token_;
};

std::string error_code(const Reply& r) {
  if (!r.body.is_object() || !r.body.contains("error")) return "(no error object: " + r.raw + ")";
  return r.body["error"].value("code", "");
}
std::string error_message(const Reply& r) {
  if (!r.body.is_object() || !r.body.contains("error")) return "";
  return r.body["error"].value("message", "");
}

// The stored history and verification, read in process after the server has stopped.
struct StoredStream {
  RuleConfig config;
  std::vector<DecisionRecord> history;
  VerifyReport verify;
};
StoredStream read_stream(const std::string& db, const std::string& name) {
  auto ledger = Ledger::open(db);
  REQUIRE_MESSAGE(ledger.ok(), (ledger.ok() ? "" : ledger.error().message));
  StoredStream s;
  auto status = (*ledger)->status(name);
  REQUIRE(status.ok());
  s.config = status->config;
  auto h = (*ledger)->history(name);
  REQUIRE(h.ok());
  s.history = *h;
  auto v = (*ledger)->verify(name);
  REQUIRE(v.ok());
  s.verify = *v;
  return s;
}

TEST_CASE(
    "Server: 8 concurrent clients, 2,000 decisions over 4 streams with retries and conflicts; each id once, "
    "histories equal replay, verify passes") {
  const std::uint64_t seed = 424242;
  INFO("seed " << seed);
  TempDir dir;
  const std::string db = dir.file("db");
  ServerProcess server(db, dir.file("server.log"));
  const std::vector<std::pair<std::string, std::string>> streams = {{"web-lord", "lord++"},
                                                                    {"web-saffron", "saffron"},
                                                                    {"web-addis", "addis"},
                                                                    {"web-investing", "alpha-investing"}};
  {
    Api api(server.port());
    for (const auto& [name, rule] : streams) REQUIRE(api.create(name, rule).status == 201);
  }
  // The tests: n = 0..1999, stream n % 4; client (n / 4) % 8 sends it, so every client works on
  // every stream. Some are also sent by the next client at the same time (a duplicate delivery),
  // some are retried at once by the same client, some are resent with another p-value (conflict).
  struct Plan {
    std::string stream, id;
    double p = 0;
    bool retry = false, conflict = false, also_next_client = false;
  };
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> unif(0.0, 1.0);
  const int kTests = 2000, kClients = 8;
  std::vector<Plan> plan(kTests);
  for (int n = 0; n < kTests; ++n) {
    Plan& t = plan[static_cast<std::size_t>(n)];
    t.stream = streams[static_cast<std::size_t>(n % 4)].first;
    t.id = test_support::tag("exp-", n);
    t.p = unif(rng) < 0.15 ? unif(rng) * 1e-3 : unif(rng);
    t.retry = unif(rng) < 0.10;
    t.conflict = unif(rng) < 0.05;
    t.also_next_client = unif(rng) < 0.05;
  }
  struct Sent {
    std::size_t test;
    bool conflicting;  // sent with another p-value
    Reply reply;
  };
  std::vector<std::vector<Sent>> sent(kClients);
  std::vector<std::thread> clients;
  for (int c = 0; c < kClients; ++c) {
    clients.emplace_back([&, c] {
      Api api(server.port());
      for (int n = 0; n < kTests; ++n) {
        const Plan& t = plan[static_cast<std::size_t>(n)];
        const int owner = (n / 4) % kClients;
        const bool mine = owner == c || (t.also_next_client && (owner + 1) % kClients == c);
        if (!mine) continue;
        auto& out = sent[static_cast<std::size_t>(c)];
        out.push_back({static_cast<std::size_t>(n), false, api.decide(t.stream, t.id, t.p)});
        if (t.retry) out.push_back({static_cast<std::size_t>(n), false, api.decide(t.stream, t.id, t.p)});
        if (t.conflict)
          out.push_back(
              {static_cast<std::size_t>(n), true, api.decide(t.stream, t.id, t.p == 0.5 ? 0.25 : 0.5)});
      }
    });
  }
  for (auto& t : clients) t.join();
  const auto code = server.stop();
  REQUIRE_MESSAGE(code.has_value(), "the server did not stop within 30 s of SIGTERM");
  CHECK(*code == 0);

  std::map<std::string, DecisionRecord> stored;
  std::size_t total = 0;
  for (const auto& [name, rule] : streams) {
    INFO("stream " << name);
    const StoredStream s = read_stream(db, name);
    CHECK_MESSAGE(s.verify.ok, "verify: step " << s.verify.first_bad_step << ": " << s.verify.problem);
    CHECK(s.verify.steps == s.history.size());
    test_support::check_history_equals_replay(s.history, s.config);
    for (const auto& r : s.history) stored[r.id] = r;
    total += s.history.size();
  }
  CHECK(total == static_cast<std::size_t>(kTests));  // every test decided, each once
  CHECK(stored.size() == static_cast<std::size_t>(kTests));

  std::map<std::string, int> created;  // 201 answers per id
  int checked = 0, mismatched = 0;
  for (const auto& list : sent) {
    for (const auto& s : list) {
      const Plan& t = plan[s.test];
      INFO("id " << t.id << " reply " << s.reply.status << " " << s.reply.raw);
      if (s.conflicting) {
        CHECK(s.reply.status == 409);
        CHECK(error_code(s.reply) == "conflict");
        continue;
      }
      REQUIRE((s.reply.status == 201 || s.reply.status == 200));
      if (s.reply.status == 201) ++created[t.id];
      CHECK(s.reply.body["repeat"].get<bool>() == (s.reply.status == 200));
      const DecisionRecord& r = stored[t.id];
      const bool same = s.reply.body["step"].get<std::uint64_t>() == r.step &&
                        s.reply.body["p_value"].get<double>() == t.p && r.p_value == t.p &&
                        s.reply.body["level"].get<double>() == r.level &&
                        s.reply.body["rejected"].get<int>() == (r.rejected ? 1 : 0) &&
                        s.reply.body["wealth"].get<double>() == r.wealth &&
                        s.reply.body["stream"] == t.stream &&
                        s.reply.body["decided_at"] == format_timestamp(r.decided_at_ms);
      CHECK(same);
      mismatched += same ? 0 : 1;
      ++checked;
      if (mismatched > 5) return;
    }
  }
  CHECK(checked >= kTests);
  CHECK(created.size() == static_cast<std::size_t>(kTests));
  for (const auto& [id, count] : created) CHECK_MESSAGE(count == 1, id << " got 201 " << count << " times");
}

// Runs the CLI on the ledger and returns its stdout (REQUIRES exit 0).
std::string cli_output(const TempDir& dir, const std::vector<std::string>& args) {
  BackgroundProcess child(args, {"/dev/null", dir.file("cli.out"), dir.file("cli.err")});
  const auto code = child.wait(std::chrono::seconds(30));
  REQUIRE(code.has_value());
  REQUIRE_MESSAGE(*code == 0, read_file(dir.file("cli.err")));
  return read_file(dir.file("cli.out"));
}

TEST_CASE("Server: a closed stream's object and a repeated close answer byte for byte what the CLI prints") {
  TempDir dir;
  const std::string db = dir.file("db");
  std::string status, closed_again, listed;
  {
    ServerProcess server(db, dir.file("server.log"));
    Api api(server.port());
    REQUIRE(api.post("/v1/streams", R"({"name": "ends", "rule": "saffron", "alternative": "less"})").status ==
            201);
    REQUIRE(api.decide("ends", "a", 0.0001).status == 201);
    const Reply first = api.post("/v1/streams/ends/close", "");
    REQUIRE(first.status == 200);
    CHECK(first.body["closed_now"] == true);
    status = api.get("/v1/streams/ends").raw;
    closed_again = api.post("/v1/streams/ends/close", "").raw;
    listed = api.get("/v1/streams").raw;
    api.close();
    REQUIRE(server.stop() == std::optional<int>(0));
  }
  CHECK(status.find("\"closed_at\":") != std::string::npos);
  CHECK(status == cli_output(dir, {"--ledger", db, "--json", "status", "ends"}));
  CHECK(nlohmann::ordered_json::parse(listed)["streams"][0].dump() + "\n" ==
        cli_output(dir, {"--ledger", db, "--json", "streams"}));
  // `close --json` on the closed stream: the same object, closed_now false, the same closing hash.
  CHECK(closed_again == cli_output(dir, {"--ledger", db, "--json", "close", "ends"}));
}

TEST_CASE(
    "Server: status, next, history and a repeated decision answer byte for byte what the CLI prints with "
    "--json") {
  TempDir dir;
  const std::string db = dir.file("db");
  std::string status, next, history, streams, repeat, directed;
  {
    ServerProcess server(db, dir.file("server.log"));
    Api api(server.port());
    REQUIRE(api.post("/v1/streams", R"({"name": "same", "rule": "addis", "alpha": 0.1})").status == 201);
    for (int k = 0; k < 5; ++k)
      REQUIRE(api.decide("same", test_support::tag("t", k), k == 2 ? 0.0002 : 0.3 + 0.1 * k).status == 201);
    REQUIRE(api.post("/v1/streams", R"({"name": "directed", "rule": "saffron", "alternative": "greater"})")
                .status == 201);
    directed = api.get("/v1/streams/directed").raw;
    status = api.get("/v1/streams/same").raw;
    next = api.get("/v1/streams/same/next").raw;
    history = api.get("/v1/streams/same/history").raw;
    streams = api.get("/v1/streams").raw;
    repeat = api.decide("same", "t2", 0.0002).raw;
    api.close();
    REQUIRE(server.stop() == std::optional<int>(0));
  }
  CHECK(status == cli_output(dir, {"--ledger", db, "--json", "status", "same"}));
  CHECK(directed == cli_output(dir, {"--ledger", db, "--json", "status", "directed"}));
  CHECK(directed.find("\"alternative\":\"greater\"") != std::string::npos);
  CHECK(next == cli_output(dir, {"--ledger", db, "--json", "next", "same"}));
  CHECK(repeat ==
        cli_output(dir, {"--ledger", db, "--json", "decide", "same", "--id", "t2", "--p", "0.0002"}));
  std::string stream_lines;
  const auto listed = nlohmann::ordered_json::parse(streams);
  for (const auto& one : listed["streams"]) stream_lines += one.dump() + "\n";
  CHECK(stream_lines == cli_output(dir, {"--ledger", db, "--json", "streams"}));
  std::string rows;
  const auto parsed = nlohmann::ordered_json::parse(history);
  for (const auto& row : parsed["decisions"]) rows += row.dump() + "\n";
  CHECK(rows == cli_output(dir, {"--ledger", db, "history", "same", "--format", "jsonl"}));
}

TEST_CASE(
    "Server: without the bearer token, or with a wrong one, every route answers 401 and nothing changes") {
  TempDir dir;
  const std::string db = dir.file("db");
  const std::string token = "k7Qw-2mXr9-vT4pL-8sNf";
  write_file(dir.file("token"), token + "\n");
  ServerProcess server(db, dir.file("server.log"), {"--token-file", dir.file("token")});
  Api good(server.port(), token);
  REQUIRE(good.create("guarded", "lord++").status == 201);
  REQUIRE(good.decide("guarded", "first", 0.01).status == 201);

  Api api(server.port());
  const std::vector<std::string> wrong = {"",
                                          "Bearer wrong-token",
                                          "Bearer " + token + "x",
                                          "Bearer " + token.substr(1),
                                          "Basic " + token,
                                          "bearer " + token + "x",
                                          "Bearer"};
  for (const auto& auth : wrong) {
    INFO("Authorization: '" << auth << "'");
    std::vector<Reply> replies = {
        api.get("/v1/health", auth),
        api.get("/v1/streams", auth),
        api.post("/v1/streams", R"({"name": "intruder", "rule": "lord++"})", auth),
        api.get("/v1/streams/guarded", auth),
        api.get("/v1/streams/guarded/next", auth),
        api.post("/v1/streams/guarded/tests", R"({"id": "sneaky", "p_value": 0.0001})", auth),
        api.post("/v1/streams/guarded/tests", R"({"id": "first", "p_value": 0.5})", auth),
        api.get("/v1/streams/guarded/history", auth),
        api.get("/v1/streams/missing", auth),
        api.get("/v1/no-such-route", auth),
    };
    for (const auto& r : replies) {
      CHECK(r.status == 401);
      CHECK(error_code(r) == "unauthorized");
      CHECK(r.www_authenticate.find("Bearer") == 0);
    }
  }
  // Nothing changed: one stream, one decision.
  const Reply list = good.get("/v1/streams");
  REQUIRE(list.status == 200);
  REQUIRE(list.body["streams"].size() == 1);
  CHECK(list.body["streams"][0]["stream"] == "guarded");
  CHECK(list.body["streams"][0]["tests"] == 1);
  const Reply history = good.get("/v1/streams/guarded/history");
  REQUIRE(history.status == 200);
  REQUIRE(history.body["decisions"].size() == 1);
  CHECK(history.body["decisions"][0]["id"] == "first");
  CHECK(history.body["decisions"][0]["p_value"] == 0.01);
  CHECK(good.get("/v1/health").status == 200);
  good.close();
  api.close();
  REQUIRE(server.stop() == std::optional<int>(0));
  CHECK(read_file(dir.file("server.log")).find(token) == std::string::npos);  // the token is never logged
}

// Sends raw bytes and returns the status line of the answer.
std::string raw_exchange(int port, const std::string& bytes) {
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  REQUIRE(fd >= 0);
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_port = htons(static_cast<std::uint16_t>(port));
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  timeval tv{10, 0};
  ::setsockopt(fd, SOL_SOCKET, SO_RCVTIMEO, &tv, sizeof tv);
  REQUIRE(::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof addr) == 0);
  REQUIRE(::send(fd, bytes.data(), bytes.size(), 0) == static_cast<ssize_t>(bytes.size()));
  std::string got;
  char buf[4096];
  ssize_t n;
  while ((n = ::recv(fd, buf, sizeof buf, 0)) > 0) {
    got.append(buf, static_cast<std::size_t>(n));
    if (got.find("\r\n") != std::string::npos) break;
  }
  ::close(fd);
  return got.substr(0, got.find("\r\n"));
}

TEST_CASE(
    "Server: bad requests get the right 4xx and a clear message, change nothing, and the server keeps "
    "serving") {
  TempDir dir;
  const std::string db = dir.file("db");
  ServerProcess server(db, dir.file("server.log"));
  Api api(server.port());
  REQUIRE(api.create("steady", "saffron").status == 201);
  REQUIRE(api.decide("steady", "ok-1", 0.2).status == 201);

  struct Case {
    std::string what;
    std::function<Reply()> send;
    int status;
    std::string code;
    std::string message_has;  // a word the message must contain
  };
  const std::string tests = "/v1/streams/steady/tests";
  const std::vector<Case> cases = {
      {"malformed JSON (decide)", [&] { return api.post(tests, R"({"id": "x", "p_value": )"); }, 400,
       "invalid_json", "not valid JSON"},
      {"malformed JSON (create)", [&] { return api.post("/v1/streams", "{name: steady}"); }, 400,
       "invalid_json", "not valid JSON"},
      {"empty body", [&] { return api.post(tests, ""); }, 400, "invalid_json", "not valid JSON"},
      {"array body", [&] { return api.post(tests, R"([{"id": "x", "p_value": 0.1}])"); }, 400,
       "invalid_input", "JSON object"},
      {"missing id", [&] { return api.post(tests, R"({"p_value": 0.1})"); }, 400, "invalid_input", "'id'"},
      {"missing p_value", [&] { return api.post(tests, R"({"id": "x"})"); }, 400, "invalid_input",
       "'p_value'"},
      {"p_value as text", [&] { return api.post(tests, R"({"id": "x", "p_value": "0.1"})"); }, 400,
       "invalid_input", "p_value must be a JSON number"},
      {"p_value out of range", [&] { return api.post(tests, R"({"id": "x", "p_value": 1.5})"); }, 400,
       "invalid_input", "[0, 1]"},
      {"negative p_value", [&] { return api.post(tests, R"({"id": "x", "p_value": -0.1})"); }, 400,
       "invalid_input", "[0, 1]"},
      {"id as boolean", [&] { return api.post(tests, R"({"id": true, "p_value": 0.1})"); }, 400,
       "invalid_input", "id must be"},
      {"empty id", [&] { return api.post(tests, R"({"id": "", "p_value": 0.1})"); }, 400, "invalid_input",
       "id"},
      {"create without rule", [&] { return api.post("/v1/streams", R"({"name": "n1"})"); }, 400,
       "invalid_input", "'rule'"},
      {"create without name", [&] { return api.post("/v1/streams", R"({"rule": "lord++"})"); }, 400,
       "invalid_input", "'name'"},
      {"alpha as text",
       [&] { return api.post("/v1/streams", R"({"name": "n1", "rule": "lord++", "alpha": "0.05"})"); }, 400,
       "invalid_input", "alpha must be a JSON number"},
      {"alpha out of range",
       [&] { return api.post("/v1/streams", R"({"name": "n1", "rule": "lord++", "alpha": 2})"); }, 400,
       "invalid_input", "alpha"},
      {"unknown rule", [&] { return api.post("/v1/streams", R"({"name": "n1", "rule": "lord+++"})"); }, 400,
       "invalid_input", "lord+++"},
      {"misspelt parameter",
       [&] { return api.post("/v1/streams", R"({"name": "n1", "rule": "lord++", "alpah": 0.1})"); }, 400,
       "invalid_input", "alpah"},
      {"parameter the rule does not take",
       [&] { return api.post("/v1/streams", R"({"name": "n1", "rule": "lord++", "payout": 0.01})"); }, 400,
       "invalid_input", "payout"},
      {"bad stream name",
       [&] { return api.post("/v1/streams", R"({"name": "has space", "rule": "lord++"})"); }, 400,
       "invalid_input", "name"},
      {"stream exists with another rule", [&] { return api.create("steady", "lord++"); }, 409, "conflict",
       "another configuration"},
      {"same id, other p-value", [&] { return api.post(tests, R"({"id": "ok-1", "p_value": 0.3})"); }, 409,
       "conflict", "ok-1"},
      {"oversized body",
       [&] {
         return api.post(tests, R"({"id": "x", "p_value": 0.1, "pad": ")" + std::string(70000, 'a') + "\"}");
       },
       413, "too_large", "65536"},
      {"unknown route", [&] { return api.get("/v1/nothing"); }, 404, "unknown_route", "/v1/nothing"},
      {"unknown sub-route", [&] { return api.post("/v1/streams/steady/verify", "{}"); }, 404, "unknown_route",
       "routes"},
      {"unsupported method", [&] { return api.del("/v1/streams/steady"); }, 404, "unknown_route", "DELETE"},
      {"unknown stream (status)", [&] { return api.get("/v1/streams/nowhere"); }, 404, "unknown_stream",
       "nowhere"},
      {"unknown stream (next)", [&] { return api.get("/v1/streams/nowhere/next"); }, 404, "unknown_stream",
       "nowhere"},
      {"unknown stream (history)", [&] { return api.get("/v1/streams/nowhere/history"); }, 404,
       "unknown_stream", "nowhere"},
      {"unknown stream (decide)", [&] { return api.decide("nowhere", "x", 0.1); }, 404, "unknown_stream",
       "nowhere"},
  };
  for (const auto& c : cases) {
    INFO(c.what);
    const Reply r = c.send();
    INFO("reply " << r.status << " " << r.raw);
    CHECK(r.status == c.status);
    CHECK(error_code(r) == c.code);
    CHECK(error_message(r).find(c.message_has) != std::string::npos);
    CHECK(api.get("/v1/health").status == 200);  // still serving
  }
  // Not even HTTP: the server answers 400 and goes on.
  CHECK(raw_exchange(server.port(), "NONSENSE\r\n\r\n").find(" 400") != std::string::npos);
  CHECK(api.get("/v1/health").status == 200);

  // Nothing changed: one stream, one decision; and a good request still works.
  const Reply list = api.get("/v1/streams");
  REQUIRE(list.status == 200);
  CHECK(list.body["streams"].size() == 1);
  const Reply next = api.decide("steady", "ok-2", 0.3);
  REQUIRE(next.status == 201);
  CHECK(next.body["step"] == 2);
  api.close();
  REQUIRE(server.stop() == std::optional<int>(0));
  const StoredStream s = read_stream(db, "steady");
  CHECK(s.history.size() == 2);
  CHECK(s.verify.ok);
}

TEST_CASE(
    "Server: killed with SIGKILL under load and restarted, every acknowledged decision is there, unchanged") {
  TempDir dir;
  const std::string db = dir.file("db");
  std::mutex mu;
  std::map<std::string, nlohmann::json> acknowledged;  // id -> the 201 body
  {
    ServerProcess server(db, dir.file("server1.log"));
    {
      Api api(server.port());
      REQUIRE(api.create("kill-a", "lord++").status == 201);
      REQUIRE(api.create("kill-b", "saffron").status == 201);
    }
    std::atomic<bool> stop{false};
    std::atomic<int> acks{0};
    std::vector<std::thread> clients;
    for (int c = 0; c < 4; ++c) {
      clients.emplace_back([&, c] {
        Api api(server.port());
        std::mt19937_64 rng(static_cast<std::uint64_t>(100 + c));
        std::uniform_real_distribution<double> unif(0.0, 1.0);
        for (int n = 0; n < 5000 && !stop.load(); ++n) {  // bounded; ends at the kill
          const std::string id = test_support::tag("c", c) + test_support::tag("-", n);
          const Reply r = api.decide(c % 2 == 0 ? "kill-a" : "kill-b", id,
                                     unif(rng) < 0.1 ? unif(rng) * 1e-3 : unif(rng));
          if (r.status != 201) break;  // the server is gone: this request was never acknowledged
          std::lock_guard<std::mutex> lock(mu);
          acknowledged[id] = r.body;
          ++acks;
        }
      });
    }
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
    while (acks.load() < 400 && std::chrono::steady_clock::now() < deadline) {
      std::this_thread::sleep_for(std::chrono::milliseconds(2));
    }
    server.child().signal(SIGKILL);  // mid-load: requests are in flight
    stop = true;
    for (auto& t : clients) t.join();
    REQUIRE(server.child().wait(std::chrono::seconds(10)).has_value());
  }
  REQUIRE(acknowledged.size() >= 100);

  // Restart on the same ledger: every acknowledged decision is stored unchanged, and resending
  // it gets the stored decision back (200, repeat).
  ServerProcess server(db, dir.file("server2.log"));
  Api api(server.port());
  std::map<std::string, nlohmann::json> stored;
  for (const std::string stream : {"kill-a", "kill-b"}) {
    const Reply h = api.get("/v1/streams/" + stream + "/history");
    REQUIRE(h.status == 200);
    for (const auto& row : h.body["decisions"]) stored[row["id"].get<std::string>()] = row;
  }
  int missing = 0;
  for (const auto& [id, body] : acknowledged) {
    INFO("acknowledged " << body.dump());
    auto it = stored.find(id);
    if (it == stored.end()) {
      ++missing;
      continue;
    }
    for (const char* key : {"step", "p_value", "level", "rejected", "wealth", "decided_at"})
      CHECK(it->second[key] == body[key]);
  }
  CHECK(missing == 0);
  int resent = 0;
  for (const auto& [id, body] : acknowledged) {
    if (++resent > 50) break;
    const Reply r = api.decide(body["stream"].get<std::string>(), id, body["p_value"].get<double>());
    CHECK(r.status == 200);
    CHECK(r.body["step"] == body["step"]);
    CHECK(r.body["level"] == body["level"]);
  }
  api.close();
  REQUIRE(server.stop() == std::optional<int>(0));
  for (const std::string stream : {"kill-a", "kill-b"}) {
    const StoredStream s = read_stream(db, stream);
    CHECK_MESSAGE(s.verify.ok, "verify: step " << s.verify.first_bad_step << ": " << s.verify.problem);
    test_support::check_history_equals_replay(s.history, s.config);
  }
}

TEST_CASE("Server: pipe and serve refuse a ledger folder that does not exist (exit 3) and create nothing") {
  TempDir dir;
  const std::string missing = dir.file("no-such-ledger");
  {
    BackgroundProcess serve({"--ledger", missing, "serve", "--listen", "127.0.0.1:0"},
                {"/dev/null", dir.file("serve.out"), dir.file("serve.err")});
    CHECK(serve.wait(std::chrono::seconds(30)) == std::optional<int>(3));
    CHECK(read_file(dir.file("serve.err")).find("no ledger at") != std::string::npos);
  }
  {
    write_file(dir.file("in.jsonl"), "{\"id\": \"a\", \"p_value\": 0.1}\n");
    BackgroundProcess pipe({"--ledger", missing, "pipe", "s"},
               {dir.file("in.jsonl"), dir.file("pipe.out"), dir.file("pipe.err")});
    CHECK(pipe.wait(std::chrono::seconds(30)) == std::optional<int>(3));
    CHECK(read_file(dir.file("pipe.err")).find("no ledger at") != std::string::npos);
  }
  CHECK_FALSE(std::filesystem::exists(missing));
}

TEST_CASE("Server: a second serve on the same address refuses to start (exit 4, address in use)") {
  TempDir dir;
  ServerProcess first(dir.file("db1"), dir.file("first.log"));
  REQUIRE(Ledger::open(dir.file("db2")).ok());
  BackgroundProcess second(
      {"--ledger", dir.file("db2"), "serve", "--listen", "127.0.0.1:" + std::to_string(first.port())},
      {"/dev/null", dir.file("second.out"), dir.file("second.err")});
  CHECK(second.wait(std::chrono::seconds(30)) == std::optional<int>(4));
  CHECK(read_file(dir.file("second.err")).find("address in use") != std::string::npos);
  Api api(first.port());
  CHECK(api.get("/v1/health").status == 200);
  api.close();
  CHECK(first.stop() == std::optional<int>(0));
}


// The launch-time routes (docs/http.md): the same idempotence and status codes as decide (201 new,
// 200 repeat, 404 unknown, 409 refused), the decision at the reserved level (docs/methods.md 9.1),
// and the running list and stream status answering what the CLI prints.
TEST_CASE("Server: launches, abandon and running tests") {
  TempDir dir;
  const std::string db = dir.file("db");
  std::string running;
  {
    ServerProcess server(db, dir.file("server.log"));
    Api api(server.port());
    REQUIRE(api.post("/v1/streams", R"({"name": "team", "rule": "lord++"})").status == 201);
    const Reply l1 = api.post("/v1/streams/team/launches", R"({"id": "exp-1"})");
    REQUIRE(l1.status == 201);
    CHECK(l1.body["launch"] == 1);
    const Reply l1again = api.post("/v1/streams/team/launches", R"({"id": "exp-1"})");
    CHECK(l1again.status == 200);
    CHECK(l1again.body["repeat"] == true);
    CHECK(l1again.body["level"] == l1.body["level"]);
    REQUIRE(api.post("/v1/streams/team/launches", R"({"id": "exp-2"})").status == 201);
    CHECK(api.post("/v1/streams/team/launches", R"({"name": "exp-3"})").status == 400);
    const Reply status = api.get("/v1/streams/team");
    CHECK(status.body["running"] == 2);
    const Reply d = api.decide("team", "exp-1", 0.0001);
    REQUIRE(d.status == 201);
    CHECK(d.body["level"] == l1.body["level"]);
    CHECK(d.body["launch"] == 1);
    const Reply ab = api.post("/v1/streams/team/tests/exp-2/abandon", "");
    REQUIRE(ab.status == 201);
    CHECK(api.post("/v1/streams/team/tests/exp-2/abandon", "").status == 200);
    const Reply unknown = api.post("/v1/streams/team/tests/nope/abandon", "");
    CHECK(unknown.status == 404);
    CHECK(unknown.body["error"]["code"] == "unknown_test");
    const Reply decided = api.post("/v1/streams/team/tests/exp-1/abandon", "");
    CHECK(decided.status == 409);
    CHECK(decided.body["error"]["code"] == "decided_test");
    CHECK(api.decide("team", "exp-2", 0.1).status == 409);  // abandoned
    CHECK(api.post("/v1/streams/team/launches", R"({"id": "exp-1"})").status == 409);
    REQUIRE(api.post("/v1/streams/team/launches", R"({"id": "exp-4"})").status == 201);
    const Reply list = api.get("/v1/streams/team/running");
    REQUIRE(list.status == 200);
    REQUIRE(list.body["running"].size() == 1);
    CHECK(list.body["running"][0]["id"] == "exp-4");
    CHECK(api.get("/v1/streams/nope/running").status == 404);
    running = list.raw;
    api.close();
    REQUIRE(server.stop() == std::optional<int>(0));
  }
  // The CLI's running --json prints the same objects, one a line.
  const auto parsed = nlohmann::ordered_json::parse(running);
  CHECK(parsed["running"][0].dump() + "\n" == cli_output(dir, {"--ledger", db, "--json", "running", "team"}));
  CHECK(cli_output(dir, {"--ledger", db, "verify", "team"}).find("ok") != std::string::npos);
}

}  // namespace
}  // namespace alphaledger
