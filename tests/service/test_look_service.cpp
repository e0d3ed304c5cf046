// Looks and e-values through pipe and HTTP (docs/http.md): {"event":"look",...} lines and
// POST/GET /v1/streams/{s}/tests/{id}/looks, decide bodies with e_value; the same idempotence,
// status codes and error bodies as decide. The look numbers themselves are checked against
// anytime_evidence in tests/store/test_look.cpp; here the transport.
#include <doctest/doctest.h>
#include <fcntl.h>
#include <unistd.h>

#include <httplib.h>
#include <nlohmann/json.hpp>
#include <sstream>
#include <thread>

#include "alphaledger/forms.hpp"
#include "alphaledger/service.hpp"
#include "alphaledger/store.hpp"
#include "store/faulty_store.hpp"
#include "support/temp_dir.hpp"
#include "support/text.hpp"

namespace alphaledger {
namespace {

using Json = nlohmann::json;
using test_support::split_lines;
using test_support::TempDir;
using test_support::write_file;

std::unique_ptr<Ledger> memory_ledger(MemoryStore& memory) {
  auto l = Ledger::open(borrow_store(memory), [] { return std::int64_t{1700000000000}; });
  REQUIRE(l.ok());
  return std::move(l).value();
}

// Pieces joined by append: GCC 12's -Wrestrict misfires on "literal" + std::string (GCC PR 105651).
std::string join(std::initializer_list<std::string_view> parts) {
  std::string out;
  for (auto p : parts) out.append(p);
  return out;
}

std::string look_line(const std::string& id, int n, int c, int t, const char* extra = "") {
  return join({R"({"event":"look","id":")", id, R"(","control":{"n":)", std::to_string(n), R"(,"conversions":)",
               std::to_string(c), R"(},"treatment":{"n":)", std::to_string(n), R"(,"conversions":)",
               std::to_string(t), "}", extra, "}"});
}

}  // namespace

TEST_CASE("pipe: look lines continue, stop and repeat; bad look lines are answered and skipped") {
  MemoryStore memory;
  auto ledger = memory_ledger(memory);
  REQUIRE(ledger->create_stream("s", *resolve_config(RuleSpec{.rule = "lord++"})).ok());
  TempDir dir;
  const std::string input = join({R"({"event":"launch","id":"t"})", "\n",
                                   look_line("t", 8000, 400, 430, R"(,"mixture_sd":0.005)"), "\n",
                                   look_line("t", 7000, 400, 430), "\n",                        // count went down
                                   look_line("t", 8000, 400, 430, R"(,"mixture":0.005)"), "\n",  // misspelt key
                                   look_line("t", 40000, 2000, 2400), "\n",                      // stop
                                   look_line("t", 40000, 2000, 2400), "\n",                      // repeat
                                   look_line("never", 9000, 400, 430, R"(,"mixture_sd":0.005)"), "\n"});
  write_file(dir.file("in"), input);
  const int fd = ::open(dir.file("in").c_str(), O_RDONLY);
  REQUIRE(fd >= 0);
  std::ostringstream out;
  auto summary = run_pipe(*ledger, "s", fd, out);
  ::close(fd);
  REQUIRE(summary.ok());
  const auto lines = split_lines(out.str());
  REQUIRE(lines.size() == 7);
  CHECK(Json::parse(lines[1])["verdict"] == "continue");
  CHECK(Json::parse(lines[2])["line"] == 3);
  CHECK(Json::parse(lines[2])["error"].get<std::string>().find("control.n went down") != std::string::npos);
  CHECK(Json::parse(lines[3])["error"].get<std::string>().find("unknown field 'mixture'") != std::string::npos);
  const Json stop = Json::parse(lines[4]);
  CHECK(stop["verdict"] == "stop");
  CHECK(stop["decision"]["rejected"] == 1);
  CHECK(stop["repeat"] == false);
  CHECK(Json::parse(lines[5])["repeat"] == true);
  CHECK(Json::parse(lines[6])["error"].get<std::string>().find("never launched") != std::string::npos);
  CHECK(summary->decided == 1);
  CHECK(summary->looked == 1);
  CHECK(summary->launched == 1);
  CHECK(summary->repeats == 1);
  CHECK(summary->bad == 3);
  CHECK(summary->lines == 7);
  auto v = ledger->verify("s");
  REQUIRE(v.ok());
  CHECK(v->ok);
}

TEST_CASE("forms: e-LOND rows and decisions name the number e_value; p-value rows are unchanged") {
  DecisionRecord r;
  r.step = 1;
  r.id = "a";
  r.p_value = 12.5;
  r.level = 0.01;
  CHECK(history_row_json(r, "e-lond").find("\"e_value\":12.5") != std::string::npos);
  CHECK(history_row_json(r, "e-lond").find("p_value") == std::string::npos);
  CHECK(history_row_json(r, "lord++").find("\"p_value\":12.5") != std::string::npos);
  CHECK(history_csv_header("e-lond") == kHistoryCsvHeaderE);
  CHECK(history_csv_header("lord++") == kHistoryCsvHeader);
  DecideResult d{"s", r, false};
  CHECK(decision_json(d).find("\"p_value\":12.5") != std::string::npos);
  d.record.e_value = true;
  CHECK(decision_json(d).find("\"e_value\":12.5") != std::string::npos);
}

TEST_CASE("pipe: e-value lines decide an e-LOND stream; p-values there and e-values elsewhere are refused") {
  MemoryStore memory;
  auto ledger = memory_ledger(memory);
  REQUIRE(ledger->create_stream("e", *resolve_config(RuleSpec{.rule = "e-lond"})).ok());
  TempDir dir;
  write_file(dir.file("in"), join({R"({"id":"a","e_value":5000})", "\n", R"({"id":"b","p_value":0.01})", "\n",
                                   R"({"id":"c","e_value":-1})", "\n", R"({"id":"d","e_value":2,"p_value":0.1})", "\n",
                                   R"({"id":"a","e_value":5000})", "\n"}));
  const int fd = ::open(dir.file("in").c_str(), O_RDONLY);
  REQUIRE(fd >= 0);
  std::ostringstream out;
  auto summary = run_pipe(*ledger, "e", fd, out);
  ::close(fd);
  REQUIRE(summary.ok());
  const auto lines = split_lines(out.str());
  REQUIRE(lines.size() == 5);
  CHECK(Json::parse(lines[0])["e_value"] == 5000.0);
  CHECK(Json::parse(lines[0])["rejected"] == 1);  // 5000 >= 1/level, level 0.00274... (e-LOND, JM gamma)
  CHECK(Json::parse(lines[1])["error"].get<std::string>().find("give e_value, not p_value") != std::string::npos);
  CHECK(Json::parse(lines[2])["error"].get<std::string>().find("e_value") != std::string::npos);
  CHECK(Json::parse(lines[3])["error"].get<std::string>().find("not both") != std::string::npos);
  CHECK(Json::parse(lines[4])["repeat"] == true);
  CHECK(summary->decided == 1);
}

TEST_CASE("HTTP: POST and GET .../tests/{id}/looks and decide with e_value, status codes as decide") {
  MemoryStore memory;
  auto ledger = memory_ledger(memory);
  REQUIRE(ledger->create_stream("s", *resolve_config(RuleSpec{.rule = "lord++"})).ok());
  REQUIRE(ledger->create_stream("e", *resolve_config(RuleSpec{.rule = "e-lond"})).ok());
  REQUIRE(ledger->launch("s", "t").ok());
  REQUIRE(ledger->decide("s", "done", 0.5).ok());
  HttpOptions options;
  options.listen = {"127.0.0.1", 0};
  options.threads = 2;
  auto service = HttpService::create(*ledger, options);
  REQUIRE(service.ok());
  auto port = (*service)->bind();
  REQUIRE(port.ok());
  std::thread runner([&] { CHECK((*service)->run().ok()); });
  httplib::Client cli("127.0.0.1", *port);
  auto post = [&](const std::string& path, const std::string& body) {
    auto r = cli.Post(path.c_str(), body, "application/json");
    REQUIRE(r);
    return std::make_pair(r->status, Json::parse(r->body));
  };
  const std::string body = R"({"control":{"n":8000,"conversions":400},"treatment":{"n":8000,"conversions":430},)"
                           R"("mixture_sd":0.005})";
  auto [s1, j1] = post("/v1/streams/s/tests/t/looks", body);
  CHECK(s1 == 201);
  CHECK(j1["verdict"] == "continue");
  auto [s2, j2] = post("/v1/streams/s/tests/t/looks", body);
  CHECK(s2 == 200);
  CHECK(j2["repeat"] == true);
  auto [s3, j3] = post("/v1/streams/s/tests/t/looks", R"({"control":{"n":7000,"conversions":400},)"
                                                       R"("treatment":{"n":8000,"conversions":430}})");
  CHECK(s3 == 400);
  CHECK(j3["error"]["message"].get<std::string>().find("control.n went down") != std::string::npos);
  auto [s4, j4] = post("/v1/streams/s/tests/never/looks", body);
  CHECK(s4 == 404);
  auto [s5, j5] = post("/v1/streams/s/tests/done/looks", body);
  CHECK(s5 == 409);
  auto [s6, j6] = post("/v1/streams/s/tests/t/looks", R"({"control":{"n":8000,"conversions":400},)"
                                                       R"("treatment":{"n":8000,"conversions":430},"mixture_sd":0})");
  CHECK(s6 == 400);
  CHECK(j6["error"]["message"].get<std::string>().find("mixture_sd") != std::string::npos);
  auto listed = cli.Get("/v1/streams/s/tests/t/looks");
  REQUIRE(listed);
  CHECK(listed->status == 200);
  CHECK(Json::parse(listed->body)["looks"].size() == 1);

  auto [d1, e1] = post("/v1/streams/e/tests", R"({"id":"a","e_value":5000})");
  CHECK(d1 == 201);
  CHECK(e1["e_value"] == 5000.0);
  auto [d2, e2] = post("/v1/streams/e/tests", R"({"id":"b","p_value":0.01})");
  CHECK(d2 == 400);
  CHECK(e2["error"]["message"].get<std::string>().find("give e_value") != std::string::npos);
  auto [d3, e3] = post("/v1/streams/s/tests", R"({"id":"b","e_value":3})");
  CHECK(d3 == 400);
  auto [d4, e4] = post("/v1/streams/e/tests", R"({"id":"a","e_value":6})");
  CHECK(d4 == 409);
  cli.stop();
  (*service)->stop();
  runner.join();
}

}  // namespace alphaledger
