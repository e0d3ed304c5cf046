// The ledger's closing, paged history and anchors over HTTP, in
// process over an in-memory (fault-injecting) store. Status codes, error codes, page sizes and
// keys are this service's own contract (docs/http.md): expected values are "common practice, no
// source" for HTTP and that contract; chain and closing hashes are compared with the ledger's own
// answers, not with constants.
#include <doctest/doctest.h>

#include <nlohmann/json.hpp>
#include <httplib.h>

#include <string>
#include <thread>
#include <vector>

#include "alphaledger/forms.hpp"
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

constexpr std::int64_t kNow = 1700000000000;  // 2023-11-14T22:13:20.000Z

struct Answer {
  int status = 0;
  nlohmann::ordered_json body;
  std::string raw;
  std::string next_page;  // the X-Next-Page header
};

// A ledger over MemoryStore -> FaultyStore and a running HttpService on a free loopback port.
struct Wired {
  MemoryStore memory;
  FaultyStore faults{memory};
  std::unique_ptr<Ledger> ledger;
  std::unique_ptr<HttpService> service;
  std::thread runner;
  std::unique_ptr<httplib::Client> client;

  Wired() {
    auto l = Ledger::open(borrow_store(faults), [] { return kNow; });
    REQUIRE(l.ok());
    ledger = std::move(*l);
    HttpOptions options;
    options.listen = {"127.0.0.1", 0};
    options.threads = 2;
    auto s = HttpService::create(*ledger, std::move(options));
    REQUIRE(s.ok());
    service = std::move(*s);
    auto port = service->bind();
    REQUIRE(port.ok());
    runner = std::thread([this] { CHECK(service->run().ok()); });
    client = std::make_unique<httplib::Client>("127.0.0.1", *port);
    client->set_read_timeout(10, 0);
  }
  ~Wired() {
    client->stop();
    service->stop();
    runner.join();
  }
  void create(const std::string& name) {
    REQUIRE(ledger->create_stream(name, *resolve_config(RuleSpec{.rule = "lord++"})).ok());
  }
  // n tests "t1".."tn" with p-values that reject now and then.
  void fill(const std::string& name, int n) {
    std::vector<TestInput> tests;
    for (int k = 1; k <= n; ++k)
      tests.push_back({test_support::tag("t", k), k % 9 == 0 ? 0.00001 : 0.2 + 0.7 * ((k * 37) % 100) / 100.0});
    auto b = ledger->decide_batch(name, tests);
    REQUIRE(b.ok());
    REQUIRE_FALSE(b->error.has_value());
  }
  static Answer wrap(const httplib::Result& r) {
    Answer a;
    REQUIRE(r);
    a.status = r->status;
    a.raw = r->body;
    a.body = nlohmann::ordered_json::parse(r->body, nullptr, false);
    a.next_page = r->get_header_value("X-Next-Page");
    return a;
  }
  Answer get(const std::string& path) { return wrap(client->Get(path.c_str())); }
  Answer post(const std::string& path, const std::string& body) {
    return wrap(client->Post(path.c_str(), body, "application/json"));
  }
};

std::string code_of(const Answer& a) {
  if (!a.body.is_object() || !a.body.contains("error")) return "(none)";
  return a.body["error"].value("code", "");
}
std::string message_of(const Answer& a) {
  if (!a.body.is_object() || !a.body.contains("error")) return "";
  return a.body["error"].value("message", "");
}

TEST_CASE("HTTP wire: POST /v1/streams/{s}/close closes once, then refuses tests and levels with 409") {
  Wired w;
  w.create("ending");
  w.create("open-one");
  for (int k = 0; k < 3; ++k) {
    REQUIRE(w.post("/v1/streams/ending/tests", "{\"id\": \"" + test_support::tag("e", k) + "\", \"p_value\": 0.3}")
                .status == 201);
  }
  const Answer closed = w.post("/v1/streams/ending/close", "");
  REQUIRE(closed.status == 200);
  CHECK(closed.body["stream"] == "ending");
  CHECK(closed.body["tests"] == 3);
  CHECK(closed.body["closed_at"] == "2023-11-14T22:13:20.000Z");  // format_timestamp(kNow)
  CHECK(closed.body["closed_now"] == true);
  const std::string hash = closed.body["closing_hash"].get<std::string>();
  CHECK(hash.size() == 64);
  auto report = w.ledger->verify("ending");
  REQUIRE(report.ok());
  REQUIRE(report->ok);
  CHECK(report->closing_hash == hash);
  CHECK(w.ledger->status("ending")->closed_at_ms == kNow);

  // Again, with {} as the body: nothing changes.
  const Answer again = w.post("/v1/streams/ending/close", "{}");
  REQUIRE(again.status == 200);
  CHECK(again.body["closed_now"] == false);
  CHECK(again.body["closing_hash"] == hash);

  // Deciding and asking for a level: 409 naming the closing; a repeat of an earlier test too.
  for (const std::string id : {"new-one", "e1"}) {
    const Answer d = w.post("/v1/streams/ending/tests", "{\"id\": \"" + id + "\", \"p_value\": 0.3}");
    CHECK(d.status == 409);
    CHECK(code_of(d) == "stream_closed");
    CHECK(message_of(d).find("stream 'ending' is closed since 2023-11-14T22:13:20.000Z") !=
          std::string::npos);
  }
  CHECK(w.get("/v1/streams/ending/next").status == 409);
  CHECK(w.ledger->status("ending")->tests == 3);
  // Its history and status stay readable; the status shows closed_at, an open stream's does not.
  CHECK(w.get("/v1/streams/ending/history").body["decisions"].size() == 3);
  CHECK(w.get("/v1/streams/ending").body["closed_at"] == "2023-11-14T22:13:20.000Z");
  CHECK_FALSE(w.get("/v1/streams/open-one").body.contains("closed_at"));
  const Answer listed = w.get("/v1/streams");
  REQUIRE(listed.body["streams"].size() == 2);
  CHECK(listed.body["streams"][0]["closed_at"] == "2023-11-14T22:13:20.000Z");  // "ending" sorts first
  CHECK_FALSE(listed.body["streams"][1].contains("closed_at"));
  CHECK(w.post("/v1/streams/open-one/tests", R"({"id": "o1", "p_value": 0.3})").status == 201);

  // Unknown stream: 404; a body with fields: 400 and nothing closed; GET is no route.
  const Answer unknown = w.post("/v1/streams/nowhere/close", "");
  CHECK(unknown.status == 404);
  CHECK(code_of(unknown) == "unknown_stream");
  const Answer fields = w.post("/v1/streams/open-one/close", R"({"when": "now"})");
  CHECK(fields.status == 400);
  CHECK(message_of(fields).find("close takes no fields, got 'when'") != std::string::npos);
  CHECK(w.post("/v1/streams/open-one/close", "[1]").status == 400);
  CHECK_FALSE(w.ledger->status("open-one")->closed_at_ms.has_value());
  CHECK(w.get("/v1/streams/open-one/close").status == 404);
}

TEST_CASE("HTTP wire: verify takes expect= anchors and shows the closing") {
  Wired w;
  w.create("anchored");
  w.fill("anchored", 12);
  const std::string at5 = *w.ledger->chain_hash_at("anchored", 5);
  const Answer plain = w.get("/v1/streams/anchored/verify?expect=5:" + at5);
  REQUIRE(plain.status == 200);
  CHECK(plain.body["anchors_checked"] == 1);
  CHECK_FALSE(plain.body.contains("closed_at"));
  std::string wrong = at5;
  wrong[0] = wrong[0] == 'a' ? 'b' : 'a';
  const Answer mismatch = w.get("/v1/streams/anchored/verify?expect=5:" + wrong);
  CHECK(mismatch.status == 409);
  CHECK(mismatch.body["ok"] == false);
  CHECK(mismatch.body["first_bad_step"] == 5);

  const Answer closed = w.post("/v1/streams/anchored/close", "");
  REQUIRE(closed.status == 200);
  const std::string hash = closed.body["closing_hash"].get<std::string>();
  const Answer v = w.get("/v1/streams/anchored/verify?expect=closed:" + hash + "&expect=5:" + at5);
  REQUIRE(v.status == 200);
  CHECK(v.body["anchors_checked"] == 2);
  CHECK(v.body["closing_hash"] == hash);
  CHECK(v.body["closed_at"] == "2023-11-14T22:13:20.000Z");
  CHECK(w.get("/v1/streams/anchored/verify?expect=closed:" + wrong).status == 409);

  for (const std::string& q :
       std::vector<std::string>{"expect=5", "expect=x:" + at5, "anchor=5:" + at5, "expect=%zz"}) {
    INFO(q);
    const Answer bad = w.get("/v1/streams/anchored/verify?" + q);
    CHECK(bad.status == 400);
    CHECK(code_of(bad) == "invalid_input");
  }
}

TEST_CASE("HTTP wire: history is served in pages: from, limit, total, next_step and X-Next-Page") {
  Wired w;
  w.create("long");
  w.fill("long", 1005);
  auto all = w.ledger->history("long");
  REQUIRE(all.ok());

  // No parameters: the first 1000 records (the default page), and where the rest is.
  const Answer first = w.get("/v1/streams/long/history");
  REQUIRE(first.status == 200);
  CHECK(first.body["stream"] == "long");
  CHECK(first.body["from"] == 1);
  CHECK(first.body["limit"] == 1000);
  CHECK(first.body["total"] == 1005);
  CHECK(first.body["next_step"] == 1001);
  CHECK(first.next_page == "/v1/streams/long/history?from=1001&limit=1000");
  REQUIRE(first.body["decisions"].size() == 1000);
  CHECK(first.body["decisions"][0] == nlohmann::ordered_json::parse(history_row_json((*all)[0], "lord++")));
  CHECK(first.body["decisions"][999] == nlohmann::ordered_json::parse(history_row_json((*all)[999], "lord++")));

  // Following X-Next-Page reaches the end, where next_step is null and the header absent.
  const Answer rest = w.get(first.next_page);
  REQUIRE(rest.status == 200);
  REQUIRE(rest.body["decisions"].size() == 5);
  CHECK(rest.body["decisions"][4] == nlohmann::ordered_json::parse(history_row_json((*all)[1004], "lord++")));
  CHECK(rest.body["next_step"].is_null());
  CHECK(rest.next_page.empty());

  const Answer small = w.get("/v1/streams/long/history?limit=10&from=21");
  REQUIRE(small.body["decisions"].size() == 10);
  CHECK(small.body["decisions"][0]["step"] == 21);
  CHECK(small.body["next_step"] == 31);
  const Answer past = w.get("/v1/streams/long/history?from=5000");
  REQUIRE(past.status == 200);
  CHECK(past.body["decisions"].empty());
  CHECK(past.body["total"] == 1005);
  CHECK(past.body["next_step"].is_null());
  CHECK(w.get("/v1/streams/long/history?limit=10000").body["decisions"].size() == 1005);

  struct Bad {
    std::string query, says;
  };
  for (const Bad& b : std::vector<Bad>{
           {"limit=10001", "limit must be a whole number from 1 to 10000"},
           {"limit=0", "limit must be a whole number from 1 to 10000"},
           {"limit=ten", "limit=ten is not accepted"},
           {"limit=", "limit must be"},
           {"limit=1e3", "limit must be"},
           {"from=0", "from must be a whole number from 1 to"},
           {"from=-3", "from must be"},
           {"from=99999999999999999999999", "from must be"},
           {"page=2", "unknown query parameter 'page'; accepted: from=STEP"},
           {"limit=5&limit=6", "'limit' is given twice"},
       }) {
    INFO(b.query);
    const Answer a = w.get("/v1/streams/long/history?" + b.query);
    CHECK(a.status == 400);
    CHECK(code_of(a) == "invalid_input");
    CHECK(message_of(a).find(b.says) != std::string::npos);
  }
  CHECK(w.get("/v1/streams/nowhere/history?limit=5").status == 404);
}

}  // namespace
}  // namespace alphaledger
