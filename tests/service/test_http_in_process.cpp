// HttpService in process over the in-memory store: concurrent clients, then stop() from another
// thread (run under ThreadSanitizer this also checks the locking of the queue and the routes).
#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <httplib.h>

#include <thread>

#include "alphaledger/service.hpp"
#include "alphaledger/store.hpp"
#include "support/history_check.hpp"
#include "support/process.hpp"
#include "support/server_process.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"
#include "store/faulty_store.hpp"

namespace alphaledger {
namespace {

TEST_CASE(
    "HttpService: in process, concurrent deciding on two streams, then stop() from another thread ends "
    "run()") {
  MemoryStore memory;
  auto ledger = Ledger::open(borrow_store(memory), [] { return std::int64_t{1700000000000}; });
  REQUIRE(ledger.ok());
  const RuleConfig config = *resolve_config(RuleSpec{.rule = "lord++"});
  REQUIRE((*ledger)->create_stream("left", config).ok());
  REQUIRE((*ledger)->create_stream("right", config).ok());
  std::atomic<int> logged{0};
  HttpOptions options;
  options.listen = {"127.0.0.1", 0};
  options.threads = 8;
  options.access_log = [&logged](const AccessLogEntry& e) {
    if (e.status == 201 || e.status == 200) ++logged;
  };
  auto service = HttpService::create(**ledger, options);
  REQUIRE(service.ok());
  auto port = (*service)->bind();
  REQUIRE(port.ok());
  std::thread runner([&] { CHECK((*service)->run().ok()); });

  std::vector<std::thread> clients;
  std::atomic<int> created{0}, repeats{0}, other{0};
  for (int c = 0; c < 4; ++c) {
    clients.emplace_back([&, c] {
      httplib::Client cli("127.0.0.1", *port);
      cli.set_keep_alive(true);
      cli.set_tcp_nodelay(true);
      for (int n = 0; n < 50; ++n) {
        // Clients c and c ^ 1 (a pair) send the same tests, so each is sent twice at about the same time.
        const std::string stream = n % 2 == 0 ? "left" : "right";
        const std::string body = nlohmann::json{
            {"id", test_support::tag("pair", c / 2) + test_support::tag("-", n)},
            {"p_value",
             0.01 * (n % 7)}}.dump();
        auto r = cli.Post(("/v1/streams/" + stream + "/tests").c_str(), body, "application/json");
        if (r && r->status == 201)
          ++created;
        else if (r && r->status == 200)
          ++repeats;
        else
          ++other;
      }
      cli.stop();
    });
  }
  for (auto& t : clients) t.join();
  (*service)->stop();
  runner.join();
  CHECK(other == 0);
  CHECK(created == 100);  // two pairs of clients, 50 tests each; both clients of a pair send them
  CHECK(repeats == 100);
  CHECK(logged == 200);
  for (const char* s : {"left", "right"}) {
    auto h = (*ledger)->history(s);
    REQUIRE(h.ok());
    CHECK(h->size() == 50);  // 25 tests per pair
    test_support::check_history_equals_replay(*h, config);
  }
}

TEST_CASE("HttpService: stop() before run() makes run() return at once") {
  MemoryStore memory;
  auto ledger = Ledger::open(borrow_store(memory));
  REQUIRE(ledger.ok());
  HttpOptions options;
  options.listen = {"127.0.0.1", 0};
  auto service = HttpService::create(**ledger, options);
  REQUIRE(service.ok());
  REQUIRE((*service)->bind().ok());
  (*service)->stop();
  CHECK((*service)->run().ok());
}

TEST_CASE("HttpService: options and addresses are checked") {
  MemoryStore memory;
  auto ledger = Ledger::open(borrow_store(memory));
  REQUIRE(ledger.ok());
  HttpOptions bad;
  bad.threads = 0;
  auto s = HttpService::create(**ledger, bad);
  REQUIRE_FALSE(s.ok());
  CHECK(s.error().message.find("threads") != std::string::npos);
  CHECK(parse_listen_address("127.0.0.1:8742").ok());
  CHECK(parse_listen_address(":9000")->host == "127.0.0.1");
  CHECK_FALSE(parse_listen_address("127.0.0.1").ok());
  CHECK_FALSE(parse_listen_address("127.0.0.1:70000").ok());
  CHECK_FALSE(parse_listen_address("example.org:80").ok());
  CHECK(parse_listen_address("example.org:80").error().message.find("example.org") != std::string::npos);
  // The service names the value, not the command line's flag (the CLI adds that).
  CHECK(parse_listen_address("127.0.0.1").error().message.find("--listen") == std::string::npos);
  CHECK(is_loopback_host("127.0.0.1"));
  CHECK(is_loopback_host("127.1.2.3"));
  CHECK(is_loopback_host("localhost"));
  CHECK_FALSE(is_loopback_host("0.0.0.0"));
  CHECK_FALSE(is_loopback_host("192.168.1.10"));
  test_support::TempDir dir;
  test_support::write_file(dir.file("empty"), "\n");
  CHECK_FALSE(read_token_file(dir.file("empty")).ok());
  test_support::write_file(dir.file("spaces"), "two words\n");
  CHECK_FALSE(read_token_file(dir.file("spaces")).ok());
  test_support::write_file(dir.file("ok"), "  abc-123  \nignored\n");
  REQUIRE(read_token_file(dir.file("ok")).ok());
  CHECK(*read_token_file(dir.file("ok")) == "abc-123");
  CHECK_FALSE(read_token_file(dir.file("missing")).ok());
}

}  // namespace
}  // namespace alphaledger
