// HttpService against hostile or unlucky clients, in process over the in-memory (or fault-injecting)
// store: bodies nested 200,000 deep, bodies larger than the limit (chunked too), clients without the
// token sending huge bodies, slow clients, unknown stream names, a failing disk, many concurrent
// clients. Status codes and error codes are this service's own (docs/http.md), so the expected
// values here are "common practice, no source" for HTTP and the contract of docs/http.md.
#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "alphaledger/service.hpp"
#include "alphaledger/store.hpp"
#include "support/history_check.hpp"
#include "support/process.hpp"
#include "support/server_process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"
#include "store/codec.hpp"
#include "store/faulty_store.hpp"

namespace alphaledger {
namespace {

using SteadyClock = std::chrono::steady_clock;

// One raw loopback connection: what a test sends is exactly what the server gets.
class Raw {
 public:
  explicit Raw(int port) {
    fd_ = ::socket(AF_INET, SOCK_STREAM, 0);
    REQUIRE(fd_ >= 0);
    sockaddr_in addr{};
    addr.sin_family = AF_INET;
    addr.sin_port = htons(static_cast<std::uint16_t>(port));
    addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
    REQUIRE(::connect(fd_, reinterpret_cast<sockaddr*>(&addr), sizeof addr) == 0);
    const int one = 1;
    ::setsockopt(fd_, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
  }
  ~Raw() {
    if (fd_ >= 0) ::close(fd_);
  }
  Raw(const Raw&) = delete;
  Raw& operator=(const Raw&) = delete;

  // Sends all of `bytes`; false if the server closed the connection first.
  bool send(const std::string& bytes) {
    std::size_t done = 0;
    while (done < bytes.size()) {
      const ssize_t n = ::send(fd_, bytes.data() + done, bytes.size() - done, MSG_NOSIGNAL);
      if (n <= 0) return false;
      done += static_cast<std::size_t>(n);
    }
    return true;
  }

  // Reads one answer (head and Content-Length body) within `limit`. Empty if none came.
  std::string answer(std::chrono::milliseconds limit = std::chrono::seconds(10)) {
    const auto deadline = SteadyClock::now() + limit;
    while (true) {
      const std::size_t head_end = buf_.find("\r\n\r\n");
      if (head_end != std::string::npos) {
        std::size_t length = 0;
        const std::size_t cl = buf_.find("Content-Length: ");
        if (cl != std::string::npos && cl < head_end) length = std::stoul(buf_.substr(cl + 16));
        if (buf_.size() >= head_end + 4 + length) {
          std::string out = buf_.substr(0, head_end + 4 + length);
          buf_.erase(0, head_end + 4 + length);
          return out;
        }
      }
      const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - SteadyClock::now());
      if (left.count() <= 0) return {};
      pollfd p{fd_, POLLIN, 0};
      if (::poll(&p, 1, static_cast<int>(left.count())) <= 0) return {};
      char tmp[65536];
      const ssize_t n = ::recv(fd_, tmp, sizeof tmp, 0);
      if (n <= 0) return {};
      buf_.append(tmp, static_cast<std::size_t>(n));
    }
  }

  // True if the server closed the connection within `limit` (any answer before it is skipped).
  bool closed_within(std::chrono::milliseconds limit) {
    const auto deadline = SteadyClock::now() + limit;
    while (true) {
      const auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - SteadyClock::now());
      if (left.count() <= 0) return false;
      pollfd p{fd_, POLLIN, 0};
      if (::poll(&p, 1, static_cast<int>(left.count())) <= 0) return false;
      char tmp[4096];
      const ssize_t n = ::recv(fd_, tmp, sizeof tmp, 0);
      if (n <= 0) return true;
      buf_.append(tmp, static_cast<std::size_t>(n));
    }
  }
  const std::string& received() const { return buf_; }

 private:
  int fd_ = -1;
  std::string buf_;
};

int status_of(const std::string& answer) {
  if (answer.size() < 12 || answer.compare(0, 9, "HTTP/1.1 ") != 0) return 0;
  return std::stoi(answer.substr(9, 3));
}
std::string body_of(const std::string& answer) {
  const std::size_t p = answer.find("\r\n\r\n");
  return p == std::string::npos ? std::string() : answer.substr(p + 4);
}
std::string code_of(const std::string& answer) {
  auto j = nlohmann::json::parse(body_of(answer), nullptr, false);
  if (!j.is_object() || !j.contains("error")) return "(none)";
  return j["error"].value("code", "");
}

std::string request(const std::string& method, const std::string& path, const std::string& body,
                    const std::string& extra_headers = {}) {
  std::string r = method + " " + path + " HTTP/1.1\r\nHost: 127.0.0.1\r\n" + extra_headers;
  if (!body.empty() || method == "POST") r += "Content-Length: " + std::to_string(body.size()) + "\r\n";
  return r + "\r\n" + body;
}

std::string chunked(const std::string& method, const std::string& path, const std::string& body,
                    std::size_t chunk = 4096, const std::string& extra_headers = {}) {
  std::string r = method + " " + path + " HTTP/1.1\r\nHost: 127.0.0.1\r\nTransfer-Encoding: chunked\r\n" +
                  extra_headers + "\r\n";
  for (std::size_t at = 0; at < body.size(); at += chunk) {
    const std::size_t n = std::min(chunk, body.size() - at);
    char size[32];
    std::snprintf(size, sizeof size, "%zx\r\n", n);
    r += size;
    r.append(body, at, n);
    r += "\r\n";
  }
  return r + "0\r\n\r\n";
}

// A ledger over an in-memory store (through a FaultyStore, to fail writes on demand) and a
// running HttpService on a free loopback port.
struct InProcess {
  MemoryStore memory;
  FaultyStore faults{memory};
  std::unique_ptr<Ledger> ledger;
  std::unique_ptr<HttpService> service;
  std::thread runner;
  int port = 0;

  explicit InProcess(HttpOptions options = {}) {
    auto l = Ledger::open(borrow_store(faults), [] { return std::int64_t{1700000000000}; });
    REQUIRE(l.ok());
    ledger = std::move(*l);
    options.listen = {"127.0.0.1", 0};
    auto s = HttpService::create(*ledger, std::move(options));
    REQUIRE(s.ok());
    service = std::move(*s);
    auto p = service->bind();
    REQUIRE(p.ok());
    port = *p;
    runner = std::thread([this] { CHECK(service->run().ok()); });
  }
  ~InProcess() {
    service->stop();
    runner.join();
  }
  void create(const std::string& name, const std::string& rule = "lord++") {
    REQUIRE(ledger->create_stream(name, *resolve_config(RuleSpec{.rule = rule})).ok());
  }
  // One request on a fresh connection; the answer (empty if none within 10 s).
  std::string exchange(const std::string& bytes) {
    Raw raw(port);
    raw.send(bytes);
    return raw.answer();
  }
  bool healthy() { return status_of(exchange(request("GET", "/v1/health", ""))) == 200; }
};

std::string deep(std::size_t depth) { return std::string(depth, '[') + std::string(depth, ']'); }

TEST_CASE(
    "HTTP hardening: a body nested 200,000 deep is refused with 400, chunked or not, and the server lives") {
  HttpOptions big;
  big.max_body_bytes = 1 << 20;  // so that the 400 KB body is read and parsed
  InProcess t(big);
  t.create("deep");
  const std::string body = "{\"id\": " + deep(200000) + ", \"p_value\": 0.1}";
  for (const bool use_chunks : {false, true}) {
    INFO("chunked " << use_chunks);
    for (const std::string path : {"/v1/streams/deep/tests", "/v1/streams"}) {
      const std::string answer =
          t.exchange(use_chunks ? chunked("POST", path, body, 8192) : request("POST", path, body));
      CHECK(status_of(answer) == 400);
      CHECK(code_of(answer) == "invalid_json");
      CHECK(answer.size() < 2000);  // the message quotes an excerpt, never the whole value
    }
    CHECK(t.healthy());
  }
  // With the default limit of 64 KiB the same body is refused for its size first.
  InProcess s;
  s.create("deep");
  CHECK(status_of(s.exchange(chunked("POST", "/v1/streams/deep/tests", body))) == 413);
  CHECK(status_of(s.exchange(request("POST", "/v1/streams/deep/tests", body))) == 413);
  CHECK(s.healthy());
  // A deep value the parser accepts (inside its depth bound) is not echoed whole either.
  const std::string wide = R"({"name": "n", "rule": "lord++", "alpha": ")" + std::string(30000, 'x') + "\"}";
  const std::string answer = t.exchange(request("POST", "/v1/streams", wide));
  CHECK(status_of(answer) == 400);
  CHECK(answer.size() < 1000);
}

TEST_CASE("HTTP hardening: the body limit holds while reading, chunked too; 413 with the body unread") {
  HttpOptions options;
  options.max_body_bytes = 1000;
  InProcess s(options);
  s.create("lim");
  const std::string pad = R"({"id": "x", "p_value": 0.1, "pad": ")" + std::string(5000, 'a') + "\"}";
  SUBCASE("chunked, over the limit") {
    const std::string answer = s.exchange(chunked("POST", "/v1/streams/lim/tests", pad, 100));
    CHECK(status_of(answer) == 413);
    CHECK(code_of(answer) == "too_large");
    CHECK(body_of(answer).find("1000") != std::string::npos);
  }
  SUBCASE("chunked, one huge chunk announced: refused before its bytes come") {
    Raw raw(s.port);
    raw.send("POST /v1/streams/lim/tests HTTP/1.1\r\nTransfer-Encoding: chunked\r\n\r\n7fffffff\r\n");
    CHECK(status_of(raw.answer(std::chrono::seconds(3))) == 413);
  }
  SUBCASE("Content-Length of 200 MiB: 413 at once, without waiting for the body") {
    Raw raw(s.port);
    raw.send("POST /v1/streams/lim/tests HTTP/1.1\r\nContent-Length: 209715200\r\n\r\n");
    const std::string answer = raw.answer(std::chrono::seconds(3));
    CHECK(status_of(answer) == 413);
    CHECK(answer.find("Connection: close") != std::string::npos);
  }
  SUBCASE("under the limit, chunked, in small pieces: decided") {
    const std::string answer =
        s.exchange(chunked("POST", "/v1/streams/lim/tests", R"({"id": "small", "p_value": 0.2})", 3));
    CHECK(status_of(answer) == 201);
  }
  CHECK(s.healthy());
  CHECK(s.ledger->history("lim")->size() <= 1);
}

TEST_CASE("HTTP hardening: without the token, a 200 MiB body gets 401 before any of it is read") {
  HttpOptions options;
  options.token = "s3cret-token";
  options.max_body_bytes = 1 << 20;
  InProcess s(options);
  s.create("guarded");
  for (const std::string framing : {"Content-Length: 209715200\r\n", "Transfer-Encoding: chunked\r\n"}) {
    Raw raw(s.port);
    const auto t0 = SteadyClock::now();
    raw.send("POST /v1/streams/guarded/tests HTTP/1.1\r\n" + framing + "\r\n");
    const std::string answer = raw.answer(std::chrono::seconds(3));
    CHECK(status_of(answer) == 401);
    CHECK(code_of(answer) == "unauthorized");
    CHECK(SteadyClock::now() - t0 < std::chrono::seconds(2));
    CHECK(raw.closed_within(std::chrono::seconds(5)));
  }
  // Lower-case scheme (RFC 7235 section 2.1: the scheme is case-insensitive) and the right token.
  const std::string ok =
      s.exchange(request("GET", "/v1/health", "", "Authorization: bearer s3cret-token\r\n"));
  CHECK(status_of(ok) == 200);
  const std::string upper =
      s.exchange(request("GET", "/v1/health", "", "Authorization: BEARER s3cret-token\r\n"));
  CHECK(status_of(upper) == 200);
  const std::string wrong =
      s.exchange(request("GET", "/v1/health", "", "Authorization: bearer s3cret-tokeN\r\n"));
  CHECK(status_of(wrong) == 401);
}

TEST_CASE("HTTP hardening: malformed framing gets 400 with a JSON error, not a dropped connection") {
  InProcess s;
  s.create("framing");
  const std::vector<std::string> bad = {
      "POST /v1/streams/framing/tests HTTP/1.1\r\nContent-Length: abc\r\n\r\n",
      "POST /v1/streams/framing/tests HTTP/1.1\r\nContent-Length: -5\r\n\r\n",
      "POST /v1/streams/framing/tests HTTP/1.1\r\nContent-Length: 99999999999999999999999\r\n\r\n",
      "POST /v1/streams/framing/tests HTTP/1.1\r\nContent-Length: 3\r\nContent-Length: 4\r\n\r\n{}",
      "POST /v1/streams/framing/tests HTTP/1.1\r\nTransfer-Encoding: gzip\r\n\r\n",
      "POST /v1/streams/framing/tests HTTP/1.1\r\nTransfer-Encoding: chunked\r\nContent-Length: 2\r\n\r\n",
      "POST /v1/streams/framing/tests HTTP/1.1\r\nTransfer-Encoding: chunked\r\n\r\nzz\r\n",
      "GET /v1/health HTTP/2.0\r\n\r\n",
      "GET /v1/health\r\n\r\n",
      "GET /v1/health HTTP/1.1\r\nno colon here\r\n\r\n",
  };
  for (const auto& bytes : bad) {
    INFO(bytes);
    const std::string answer = s.exchange(bytes);
    CHECK(status_of(answer) == 400);
    CHECK(code_of(answer) == "invalid_request");
  }
  // Headers without end: 431 once past the limit.
  const std::string answer = s.exchange("GET /v1/health HTTP/1.1\r\nX-Pad: " + std::string(20000, 'p'));
  CHECK(status_of(answer) == 431);
  CHECK(s.healthy());
  CHECK(s.ledger->history("framing")->empty());
}

TEST_CASE(
    "HTTP hardening: slow clients, more than the worker threads, neither starve health nor stay forever") {
  HttpOptions options;
  options.threads = 2;
  options.io_timeout_seconds = 2;
  InProcess s(options);
  s.create("slow");
  // 6 clients, each sending one header byte every 300 ms: 3 times the worker threads.
  std::vector<std::unique_ptr<Raw>> slow;
  for (int k = 0; k < 6; ++k) slow.push_back(std::make_unique<Raw>(s.port));
  const std::string line = "POST /v1/streams/slow/tests HTTP/1.1\r\nX-Slow: ";
  std::atomic<bool> done{false};
  std::thread dripper([&] {
    for (std::size_t i = 0; i < 40 && !done.load(); ++i) {
      for (auto& r : slow) r->send(std::string(1, i < line.size() ? line[i] : 'z'));
      std::this_thread::sleep_for(std::chrono::milliseconds(300));
    }
  });
  // Health answers at once while they drip.
  for (int k = 0; k < 5; ++k) {
    const auto t0 = SteadyClock::now();
    CHECK(s.healthy());
    CHECK(SteadyClock::now() - t0 < std::chrono::milliseconds(1000));
    std::this_thread::sleep_for(std::chrono::milliseconds(200));
  }
  // Each slow client is answered 408 and disconnected once its request took more than 2 s.
  int timed_out = 0;
  for (auto& r : slow) {
    const bool closed = r->closed_within(std::chrono::seconds(5));
    CHECK(closed);
    if (status_of(r->received()) == 408) ++timed_out;
  }
  done = true;
  dripper.join();
  CHECK(timed_out == 6);
  CHECK(s.healthy());
}

TEST_CASE("HTTP hardening: unknown stream names leave nothing behind; lanes live only while in use") {
  InProcess s;
  s.create("real");
  for (int k = 0; k < 2000; ++k) {
    const std::string answer = s.exchange(request(
        "POST", "/v1/streams/" + test_support::tag("ghost-", k) + "/tests", R"({"id": "x", "p_value": 0.5})"));
    REQUIRE(status_of(answer) == 404);
  }
  CHECK(s.service->queue_lanes() == 0);
  for (int k = 0; k < 20; ++k) {
    const std::string answer = s.exchange(request(
        "POST", "/v1/streams/real/tests", "{\"id\": \"" + test_support::tag("t", k) + "\", \"p_value\": 0.5}"));
    REQUIRE(status_of(answer) == 201);
  }
  CHECK(s.service->queue_lanes() == 0);  // the idle lane was dropped
}

TEST_CASE(
    "HTTP hardening: after a storage failure health answers 503 with the reason until a write succeeds") {
  InProcess s;
  s.create("disk");
  CHECK(s.healthy());
  s.faults.fail_all_writes("No space left on device");
  const std::string failed =
      s.exchange(request("POST", "/v1/streams/disk/tests", R"({"id": "a", "p_value": 0.1})"));
  CHECK(status_of(failed) == 503);
  CHECK(code_of(failed) == "storage");
  const std::string health = s.exchange(request("GET", "/v1/health", ""));
  CHECK(status_of(health) == 503);
  CHECK(code_of(health) == "storage");
  CHECK(body_of(health).find("No space left on device") != std::string::npos);
  // Reads still work and do not clear it: only a successful write does.
  CHECK(status_of(s.exchange(request("GET", "/v1/streams/disk", ""))) == 200);
  CHECK(status_of(s.exchange(request("GET", "/v1/health", ""))) == 503);
  s.faults.clear_faults();
  CHECK(status_of(s.exchange(request("POST", "/v1/streams/disk/tests", R"({"id": "a", "p_value": 0.1})"))) ==
        201);
  CHECK(s.healthy());
}

TEST_CASE("HTTP hardening: GET /v1/streams/{s}/verify answers the report; 200 when ok, 409 when not") {
  InProcess s;
  s.create("checked");
  for (int k = 0; k < 3; ++k) {
    REQUIRE(status_of(s.exchange(request("POST", "/v1/streams/checked/tests",
                                         "{\"id\": \"" + test_support::tag("v", k) + "\", \"p_value\": 0.3}"))) ==
            201);
  }
  const std::string ok = s.exchange(request("GET", "/v1/streams/checked/verify", ""));
  REQUIRE(status_of(ok) == 200);
  auto j = nlohmann::json::parse(body_of(ok));
  CHECK(j["ok"] == true);
  CHECK(j["steps"] == 3);
  CHECK(j["first_bad_step"].is_null());
  CHECK(j["chain_hash"].get<std::string>().size() == 64);  // SHA-256 in hex
  CHECK(j["chain_hash"] == *s.ledger->chain_hash_at("checked", 3));
  CHECK(status_of(s.exchange(request("GET", "/v1/streams/nothing/verify", ""))) == 404);

  // Change one stored byte of record 2 behind the ledger's back.
  auto stored = s.memory.get(store::record_key("checked", 2));
  REQUIRE(stored.ok());
  REQUIRE(stored->has_value());
  std::string bytes = **stored;
  bytes[bytes.size() / 2] = static_cast<char>(bytes[bytes.size() / 2] ^ 0x01);
  WriteBatch tamper;
  tamper.put(store::record_key("checked", 2), bytes);
  REQUIRE(s.memory.write(tamper).ok());
  const std::string bad = s.exchange(request("GET", "/v1/streams/checked/verify", ""));
  REQUIRE(status_of(bad) == 409);
  auto b = nlohmann::json::parse(body_of(bad));
  CHECK(b["ok"] == false);
  CHECK(b["first_bad_step"] == 2);
  CHECK_FALSE(b["problem"].get<std::string>().empty());
}

TEST_CASE("HTTP hardening: POST /v1/streams takes `alternative`, and the stream object shows it") {
  InProcess s;
  const std::string answer = s.exchange(
      request("POST", "/v1/streams", R"({"name": "dir", "rule": "lord++", "alternative": "greater"})"));
  REQUIRE(status_of(answer) == 201);
  auto j = nlohmann::json::parse(body_of(answer));
  CHECK(j["alternative"] == "greater");
  CHECK(s.ledger->status("dir")->alternative == Alternative::kGreater);
  const std::string bad = s.exchange(
      request("POST", "/v1/streams", R"({"name": "dir2", "rule": "lord++", "alternative": "sideways"})"));
  CHECK(status_of(bad) == 400);
  CHECK(body_of(bad).find("alternative") != std::string::npos);
  // Two-sided (the default) is not shown, as in `status --json`.
  REQUIRE(status_of(s.exchange(request("POST", "/v1/streams", R"({"name": "plain", "rule": "lord++"})"))) ==
          201);
  CHECK(body_of(s.exchange(request("GET", "/v1/streams/plain", ""))).find("alternative") ==
        std::string::npos);
}

TEST_CASE("HTTP hardening: 32 and 64 concurrent keep-alive clients with 8 workers: no failed request") {
  HttpOptions options;
  options.threads = 8;
  InProcess s(options);
  s.create("many-a");
  s.create("many-b", "saffron");
  for (const int clients : {32, 64}) {
    INFO(clients << " clients");
    std::atomic<int> good{0}, bad{0};
    std::vector<std::thread> threads;
    for (int c = 0; c < clients; ++c) {
      threads.emplace_back([&, c] {
        Raw raw(s.port);
        for (int n = 0; n < 10; ++n) {
          const std::string stream = (c + n) % 2 == 0 ? "many-a" : "many-b";
          const std::string id = test_support::tag("c", clients) + test_support::tag("-", c) + test_support::tag("-", n);
          std::string bytes = n % 3 == 2 ? request("GET", "/v1/streams/" + stream + "/next", "")
                                         : request("POST", "/v1/streams/" + stream + "/tests",
                                                   "{\"id\": \"" + id + "\", \"p_value\": 0.25}");
          if (!raw.send(bytes)) {
            ++bad;
            return;
          }
          const int status = status_of(raw.answer(std::chrono::seconds(30)));
          if (status == 200 || status == 201)
            ++good;
          else
            ++bad;
        }
      });
    }
    for (auto& t : threads) t.join();
    CHECK(bad == 0);
    CHECK(good == clients * 10);
  }
  for (const char* stream : {"many-a", "many-b"}) {
    auto h = s.ledger->history(stream);
    REQUIRE(h.ok());
    test_support::check_history_equals_replay(*h, s.ledger->status(stream)->config);
  }
}

TEST_CASE("HTTP hardening: a second service cannot bind an address in use") {
  MemoryStore memory;
  auto ledger = Ledger::open(borrow_store(memory));
  REQUIRE(ledger.ok());
  HttpOptions options;
  options.listen = {"127.0.0.1", 0};
  auto first = HttpService::create(**ledger, options);
  REQUIRE(first.ok());
  auto port = (*first)->bind();
  REQUIRE(port.ok());
  options.listen.port = *port;
  auto second = HttpService::create(**ledger, options);
  REQUIRE(second.ok());
  auto again = (*second)->bind();
  REQUIRE_FALSE(again.ok());
  CHECK(again.error().kind == ErrorKind::kBusy);
  CHECK(again.error().message.find("address in use") != std::string::npos);
}

}  // namespace
}  // namespace alphaledger
