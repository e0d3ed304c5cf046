// alphaledger serve: the HTTP/JSON routes (docs/http.md), one function per
// route, over the small HTTP server of http_server.hpp.
#include <arpa/inet.h>

#include <atomic>
#include <charconv>
#include <chrono>
#include <fstream>
#include <mutex>

#include "alphaledger/service.hpp"
#include "alphaledger/stats.hpp"
#include "alphaledger/test_log.hpp"
#include "service/error_status.hpp"
#include "service/http_server.hpp"

namespace alphaledger {
namespace {

using Json = nlohmann::ordered_json;
using http::Request;
using http::Response;
using http::ErrorStatus;
using http::error_status;

Response json_response(int status, const Json& body) {
  return Response{status, dump_json(body) + "\n", {}, false};
}

Response error_response(int status, std::string_view code, const std::string& message) {
  Json j;
  j["error"]["code"] = std::string(code);
  j["error"]["message"] = message;
  return json_response(status, j);
}

// Ledger errors to HTTP: the table is service/error_status.cpp.
Response ledger_error(const Error& e) {
  const ErrorStatus mapped = error_status(e);
  return error_response(mapped.status, mapped.code, e.message);
}

bool same_secret(std::string_view a, std::string_view b) {
  // Compares every byte whatever the first difference, so timing does not reveal the prefix.
  unsigned diff = a.size() == b.size() ? 0U : 1U;
  for (std::size_t i = 0; i < a.size(); ++i) {
    diff |= static_cast<unsigned>(static_cast<unsigned char>(a[i]) ^
                                  static_cast<unsigned char>(i < b.size() ? b[i] : 0));
  }
  return diff == 0;
}

bool iequals(std::string_view a, std::string_view b) {
  if (a.size() != b.size()) return false;
  for (std::size_t i = 0; i < a.size(); ++i) {
    char x = a[i], y = b[i];
    if (x >= 'A' && x <= 'Z') x = static_cast<char>(x - 'A' + 'a');
    if (y >= 'A' && y <= 'Z') y = static_cast<char>(y - 'A' + 'a');
    if (x != y) return false;
  }
  return true;
}

// Parses a request body that must be a JSON object (parse_json_object bounds the depth and never
// echoes more than an excerpt). On failure, the error answer.
Result<nlohmann::json> json_body(const Request& req, std::string_view example, Response& error) {
  auto j = parse_json_object(req.body);
  if (!j) {
    // Valid JSON that is not an object is invalid input; text that is not JSON is invalid JSON.
    const bool not_object = j.error().message.rfind("expected a JSON object", 0) == 0;
    error = error_response(
        400, not_object ? "invalid_input" : "invalid_json",
        "the request body: " + j.error().message + " (for this route: " + std::string(example) + ")");
    return j.error();
  }
  return std::move(j).value();
}

constexpr std::string_view kCreateExample = R"({"name": "checkout-team", "rule": "lord++", "alpha": 0.05})";
constexpr std::string_view kDecideExample = R"({"id": "exp-0142", "p_value": 0.0004})";
constexpr std::string_view kRouteList =
    "routes: GET /v1/health, GET|POST /v1/streams, GET /v1/streams/{name}, GET /v1/streams/{name}/next, POST "
    "/v1/streams/{name}/tests, GET /v1/streams/{name}/history?from=STEP&limit=N, GET "
    "/v1/streams/{name}/verify?expect=STEP:HASH, POST /v1/streams/{name}/close";

// History pages (docs/http.md "History"): without `limit`, kDefaultPage records; never more than
// kMaxPage in one answer, so one request never holds a whole long history in memory.
constexpr std::uint64_t kDefaultPage = 1000;
constexpr std::uint64_t kMaxPage = 10000;
constexpr std::uint64_t kMaxStep = std::uint64_t{1} << 62;

struct PageQuery {
  std::uint64_t from = 1;
  std::uint64_t limit = kDefaultPage;
};

// `from=STEP&limit=N` (either, both or none, each at most once). Errors name the parameter, an
// excerpt of the value and the accepted range.
Result<PageQuery> page_query(std::string_view query) {
  PageQuery out;
  bool seen_from = false, seen_limit = false;
  while (!query.empty()) {
    const std::size_t amp = query.find('&');
    const std::string_view pair = query.substr(0, amp);
    query = amp == std::string_view::npos ? std::string_view() : query.substr(amp + 1);
    if (pair.empty()) continue;
    const std::size_t eq = pair.find('=');
    const std::string_view key = pair.substr(0, eq);
    const std::string_view value = eq == std::string_view::npos ? std::string_view() : pair.substr(eq + 1);
    const bool is_from = key == "from", is_limit = key == "limit";
    if (!is_from && !is_limit) {
      return invalid_input("unknown query parameter '" + excerpt(key) +
                           "'; accepted: from=STEP (a step, 1 or more) and limit=N (1 to " +
                           std::to_string(kMaxPage) + ")");
    }
    if ((is_from && seen_from) || (is_limit && seen_limit))
      return invalid_input("query parameter '" + std::string(key) + "' is given twice; give it once");
    (is_from ? seen_from : seen_limit) = true;
    const std::string range = is_from ? "a whole number from 1 to " + std::to_string(kMaxStep)
                                      : "a whole number from 1 to " + std::to_string(kMaxPage);
    std::uint64_t v = 0;
    const auto [end, ec] = std::from_chars(value.data(), value.data() + value.size(), v);
    if (value.empty() || ec != std::errc() || end != value.data() + value.size() || v == 0 ||
        v > (is_from ? kMaxStep : kMaxPage)) {
      return invalid_input(std::string(key) + "=" + excerpt(value) + " is not accepted; " + std::string(key) +
                           " must be " + range);
    }
    (is_from ? out.from : out.limit) = v;
  }
  return out;
}

// "%41" -> "A". nullopt for a bad escape.
std::optional<std::string> percent_decode(std::string_view s) {
  std::string out;
  out.reserve(s.size());
  for (std::size_t i = 0; i < s.size(); ++i) {
    if (s[i] != '%') {
      out.push_back(s[i]);
      continue;
    }
    if (i + 2 >= s.size()) return std::nullopt;
    int v = 0;
    for (int k = 1; k <= 2; ++k) {
      const int d = http::hex_digit(s[i + static_cast<std::size_t>(k)]);
      if (d < 0) return std::nullopt;
      v = v * 16 + d;
    }
    out.push_back(static_cast<char>(v));
    i += 2;
  }
  return out;
}

// `expect=STEP:HASH` or `expect=closed:HASH`, repeatable (at most kMaxAnchors); nothing else.
constexpr std::size_t kMaxAnchors = 64;
Result<std::vector<Anchor>> anchor_query(std::string_view query) {
  std::vector<Anchor> out;
  while (!query.empty()) {
    const std::size_t amp = query.find('&');
    const std::string_view pair = query.substr(0, amp);
    query = amp == std::string_view::npos ? std::string_view() : query.substr(amp + 1);
    if (pair.empty()) continue;
    const std::size_t eq = pair.find('=');
    const std::string_view key = pair.substr(0, eq);
    if (key != "expect") {
      return invalid_input("unknown query parameter '" + excerpt(key) +
                           "'; accepted: expect=STEP:HASH or expect=closed:HASH, repeatable");
    }
    if (out.size() == kMaxAnchors)
      return invalid_input("more than " + std::to_string(kMaxAnchors) +
                           " expect= anchors; give at most that many");
    auto decoded = percent_decode(eq == std::string_view::npos ? std::string_view() : pair.substr(eq + 1));
    if (!decoded) return invalid_input("expect= has a bad %-escape");
    auto a = parse_anchor(*decoded);
    if (!a) return invalid_input("expect=: " + a.error().message);
    out.push_back(*a);
  }
  return out;
}

// The routes over one ledger; one member function per route.
class Routes {
 public:
  Routes(Ledger& ledger, const HttpOptions& options) : ledger_(ledger), options_(options), queue_(ledger) {}

  // Before the body is read: the token. A refused request changes nothing and its body is never
  // read.
  std::optional<Response> check_token(const Request& req) const {
    if (!options_.token) return std::nullopt;
    const std::string* header = req.header("authorization");
    // RFC 7235: the scheme name is case-insensitive; one or more spaces before the token.
    if (header != nullptr) {
      const std::string_view h(*header);
      const std::size_t space = h.find(' ');
      if (space != std::string_view::npos && iequals(h.substr(0, space), "bearer")) {
        std::string_view token = h.substr(space);
        while (!token.empty() && token.front() == ' ') token.remove_prefix(1);
        if (same_secret(token, *options_.token)) return std::nullopt;
      }
    }
    Response res = error_response(401, "unauthorized",
                                  header == nullptr || header->empty()
                                      ? "this server needs an 'Authorization: Bearer <token>' header"
                                      : "the bearer token is not the one this server was started with");
    res.headers.emplace_back("WWW-Authenticate", "Bearer realm=\"alphaledger\"");
    return res;
  }

  Response dispatch(const Request& req) {
    std::vector<std::string> parts;
    std::string_view path(req.path);
    while (!path.empty()) {
      if (path.front() == '/') {
        path.remove_prefix(1);
        continue;
      }
      const std::size_t slash = path.find('/');
      auto decoded = percent_decode(path.substr(0, slash));
      if (!decoded)
        return error_response(400, "invalid_request",
                              "the path " + excerpt(req.path) + " has a bad %-escape");
      parts.push_back(std::move(*decoded));
      if (slash == std::string_view::npos) break;
      path.remove_prefix(slash);
    }
    const std::string& m = req.method;
    const std::size_t n = parts.size();
    if (n >= 2 && parts[0] == "v1") {
      if (n == 2 && parts[1] == "health" && m == "GET") return health();
      if (parts[1] == "streams") {
        if (n == 2 && m == "GET") return list_streams();
        if (n == 2 && m == "POST") return create_stream(req);
        if (n == 3 && m == "GET") return stream_status(parts[2]);
        if (n == 4 && parts[3] == "next" && m == "GET") return next_level(parts[2]);
        if (n == 4 && parts[3] == "tests" && m == "POST") return decide(parts[2], req);
        if (n == 4 && parts[3] == "history" && m == "GET") return history(parts[2], req.query);
        if (n == 4 && parts[3] == "verify" && m == "GET") return verify(parts[2], req.query);
        if (n == 4 && parts[3] == "close" && m == "POST") return close(parts[2], req);
      }
    }
    return error_response(
        404, "unknown_route",
        "no route " + excerpt(m, 16) + " " + excerpt(req.path) + "; " + std::string(kRouteList));
  }

  // Streams for which the DecisionQueue holds a lane right now (for tests).
  std::size_t queue_lanes() const { return queue_.lane_count(); }

 private:
  // GET /v1/health: 200 {"status":"ok"}, or 503 while the last write to the ledger failed.
  Response health() {
    std::lock_guard<std::mutex> lock(health_mu_);
    if (storage_failure_) {
      Json j;
      j["status"] = "failing";
      j["error"]["code"] = "storage";
      j["error"]["message"] = "the last write to the ledger failed: " + *storage_failure_ +
                              " (decisions fail until a write succeeds again)";
      return json_response(503, j);
    }
    Json j;
    j["status"] = "ok";
    return json_response(200, j);
  }

  // Remembers the outcome of a write for health(): a storage failure makes it 503 until a later
  // write succeeds.
  void note_write(const Error* failure) {
    std::lock_guard<std::mutex> lock(health_mu_);
    if (failure == nullptr) {
      storage_failure_.reset();
    } else if (is_storage_failure(failure->kind)) {
      storage_failure_ = failure->message;
    }
  }

  // GET /v1/streams
  Response list_streams() {
    auto list = ledger_.streams();
    if (!list) return ledger_error(list.error());
    Json j;
    j["streams"] = Json::array();
    for (const auto& s : *list) j["streams"].push_back(stream_to_json(s));
    return json_response(200, j);
  }

  // POST /v1/streams
  Response create_stream(const Request& req) {
    Response error;
    auto body = json_body(req, kCreateExample, error);
    if (!body) return error;
    auto parsed = stream_request_from_json(*body);
    if (!parsed) return error_response(400, "invalid_input", parsed.error().message);
    auto config = resolve_config(parsed->spec);
    if (!config) return error_response(400, "invalid_input", config.error().message);
    auto created = ledger_.create_stream_directed(parsed->name, *config, parsed->alternative);
    if (!created) {
      note_write(&created.error());
      return ledger_error(created.error());
    }
    if (created->created) note_write(nullptr);
    return json_response(created->created ? 201 : 200, stream_to_json(created->info));
  }

  // The stream's status, or the answer for a stream that does not exist (404) or cannot be read.
  // Nothing is cached: a name that does not exist costs nothing after the answer.
  Result<StreamInfo> find_stream(const std::string& name, Response& error) {
    auto s = ledger_.status(name);
    if (s) return s;
    if (s.error().kind == ErrorKind::kNotFound) {
      error = error_response(404, "unknown_stream",
                             "no stream named '" + excerpt(name) + "'; create it with POST /v1/streams");
    } else {
      error = ledger_error(s.error());
    }
    return s.error();
  }

  // GET /v1/streams/{name}
  Response stream_status(const std::string& name) {
    Response error;
    auto s = find_stream(name, error);
    if (!s) return error;
    return json_response(200, stream_to_json(*s));
  }

  // 409 for a closed stream asked for a level or given a test.
  static Response closed_answer(const StreamInfo& s) {
    return error_response(409, "stream_closed",
                          "stream '" + excerpt(s.name) + "' is closed since " +
                              format_timestamp(*s.closed_at_ms) +
                              "; it takes no more tests (its history and verify stay readable)");
  }

  // GET /v1/streams/{name}/next
  Response next_level(const std::string& name) {
    Response error;
    auto s = find_stream(name, error);
    if (!s) return error;
    if (s->closed_at_ms) return closed_answer(*s);
    Json j;
    j["stream"] = name;
    j["step"] = s->tests + 1;
    j["level"] = s->next_level;
    return json_response(200, j);
  }

  // POST /v1/streams/{name}/tests
  Response decide(const std::string& name, const Request& req) {
    Response error;
    auto body = json_body(req, kDecideExample, error);
    if (!body) return error;
    auto input = test_from_json(*body);
    if (!input) return error_response(400, "invalid_input", input.error().message);
    auto s = find_stream(name, error);
    if (!s) return error;
    if (s->closed_at_ms) return closed_answer(*s);
    auto d = queue_.decide(name, input->id, input->p_value);
    if (!d) {
      note_write(&d.error());
      return ledger_error(d.error());
    }
    if (!d->repeat) note_write(nullptr);
    return Response{d->repeat ? 200 : 201, decision_json(*d) + "\n", {}, false};
  }

  // GET /v1/streams/{name}/history?from=STEP&limit=N: one page (docs/http.md "History").
  Response history(const std::string& name, const std::string& query) {
    auto page_asked = page_query(query);
    if (!page_asked) return error_response(400, "invalid_input", page_asked.error().message);
    Response error;
    auto s = find_stream(name, error);
    if (!s) return error;
    auto page = ledger_.history_page(name, page_asked->from, static_cast<std::size_t>(page_asked->limit));
    if (!page) return ledger_error(page.error());
    const std::string_view rule = rule_name(s->config.kind);
    Json j;
    j["stream"] = name;
    j["from"] = page_asked->from;
    j["limit"] = page_asked->limit;
    j["total"] = page->total;
    j["next_step"] = page->next_step == 0 ? Json(nullptr) : Json(page->next_step);
    j["decisions"] = Json::array();
    for (const auto& r : page->records) j["decisions"].push_back(history_row_to_json(r, rule));
    Response res = json_response(200, j);
    if (page->next_step != 0) {
      // Where the next page is, as a path the client can ask for as it is.
      res.headers.emplace_back("X-Next-Page", "/v1/streams/" + name +
                                                  "/history?from=" + std::to_string(page->next_step) +
                                                  "&limit=" + std::to_string(page_asked->limit));
    }
    return res;
  }

  // POST /v1/streams/{name}/close: Ledger::close_stream. 200 with the stream object plus
  // closed_now (false: it was closed before, nothing changed) and closing_hash. The body is empty
  // or {} (the route takes no fields).
  Response close(const std::string& name, const Request& req) {
    bool blank = true;
    for (char c : req.body) blank = blank && (c == ' ' || c == '\t' || c == '\r' || c == '\n');
    if (!blank) {
      Response error;
      auto body = json_body(req, "an empty body or {}", error);
      if (!body) return error;
      if (!body->empty())
        return error_response(
            400, "invalid_input",
            "close takes no fields, got '" + excerpt(body->begin().key()) + "'; send an empty body or {}");
    }
    Response error;
    if (!find_stream(name, error)) return error;
    auto closing = ledger_.close_stream(name);
    if (!closing) {
      note_write(&closing.error());
      return ledger_error(closing.error());
    }
    if (closing->newly_closed) note_write(nullptr);
    Json j = stream_to_json(closing->info);
    j["closed_now"] = closing->newly_closed;
    j["closing_hash"] = closing->closing_hash;
    return json_response(200, j);
  }

  // GET /v1/streams/{name}/verify?expect=STEP:HASH&expect=closed:HASH: Ledger::verify with those
  // anchors, as JSON; 200 when ok, 409 when not.
  Response verify(const std::string& name, const std::string& query) {
    auto anchors = anchor_query(query);
    if (!anchors) return error_response(400, "invalid_input", anchors.error().message);
    Response error;
    if (!find_stream(name, error)) return error;
    auto v = ledger_.verify(name, *anchors);
    if (!v) return ledger_error(v.error());
    Json j;
    j["stream"] = name;
    j["ok"] = v->ok;
    j["steps"] = v->steps;
    if (v->ok) {
      j["first_bad_step"] = nullptr;
      j["problem"] = nullptr;
      j["chain_hash"] = v->chain_hash;
      if (v->closed_at_ms) {
        j["closed_at"] = format_timestamp(*v->closed_at_ms);
        j["closing_hash"] = v->closing_hash;
      }
      j["anchors_checked"] = v->anchors_checked;
    } else {
      j["first_bad_step"] = v->first_bad_step;
      j["problem"] = v->problem;
      j["chain_hash"] = nullptr;
    }
    return json_response(v->ok ? 200 : 409, j);
  }

  Ledger& ledger_;
  const HttpOptions& options_;
  DecisionQueue queue_;
  std::mutex health_mu_;
  std::optional<std::string> storage_failure_;
};

// The answer to a request the server refused itself (malformed, too slow, too large).
Response protocol_error(int status, const std::string& what, std::size_t max_body) {
  switch (status) {
    case 400:
      return error_response(400, "invalid_request", what);
    case 408:
      return error_response(408, "timeout", what);
    case 413:
      return error_response(413, "too_large",
                            "the request body is larger than " + std::to_string(max_body) + " bytes");
    case 431:
      return error_response(431, "headers_too_large", what);
    default:
      return error_response(500, "internal", "internal error");
  }
}

class HttpServiceImpl final : public HttpService {
 public:
  HttpServiceImpl(Ledger& ledger, HttpOptions options)
      : options_(std::move(options)),
        routes_(ledger, options_),
        server_(server_options(options_), handlers()) {}

  Result<int> bind() override { return server_.bind(options_.listen.host, options_.listen.port); }

  Status run() override {
    server_.run();
    return {};
  }

  void stop() override { server_.stop(); }

  std::size_t queue_lanes() const override { return routes_.queue_lanes(); }

 private:
  static http::ServerOptions server_options(const HttpOptions& o) {
    http::ServerOptions s;
    s.threads = o.threads;
    s.max_body_bytes = o.max_body_bytes;
    s.request_timeout = std::chrono::seconds(o.io_timeout_seconds);
    s.keep_alive_timeout = std::chrono::seconds(o.keep_alive_seconds);
    s.max_connections = o.max_connections;
    return s;
  }

  http::Handlers handlers() {
    http::Handlers h;
    h.on_head = [this](const Request& req) { return routes_.check_token(req); };
    h.on_request = [this](const Request& req) {
      try {
        return routes_.dispatch(req);
      } catch (...) {
        // No library text or exception name reaches the client.
        return error_response(500, "internal", "internal error while handling the request");
      }
    };
    const std::size_t max_body = options_.max_body_bytes;
    h.on_protocol_error = [max_body](int status, const std::string& what) {
      return protocol_error(status, what, max_body);
    };
    if (options_.access_log) {
      h.on_done = [this](const Request& req, const Response& res, double ms) {
        AccessLogEntry e;
        e.remote = req.remote;
        e.method = req.method;
        e.path = excerpt(req.path, 200);
        e.status = res.status;
        e.bytes = res.body.size();
        e.ms = ms;
        options_.access_log(e);
      };
    }
    return h;
  }

  HttpOptions options_;
  Routes routes_;
  http::Server server_;
};

}  // namespace

Result<std::unique_ptr<HttpService>> HttpService::create(Ledger& ledger, HttpOptions options) {
  if (options.threads == 0 || options.threads > 1024) {
    return invalid_input("threads must be in [1, 1024], got " + std::to_string(options.threads));
  }
  if (options.max_body_bytes == 0) return invalid_input("max body bytes must be at least 1, got 0");
  if (options.io_timeout_seconds <= 0 || options.io_timeout_seconds > 3600) {
    return invalid_input("timeout must be in [1, 3600] seconds, got " +
                         std::to_string(options.io_timeout_seconds));
  }
  if (options.keep_alive_seconds <= 0 || options.keep_alive_seconds > 3600) {
    return invalid_input("keep-alive must be in [1, 3600] seconds, got " +
                         std::to_string(options.keep_alive_seconds));
  }
  if (options.max_connections == 0) return invalid_input("max connections must be at least 1, got 0");
  if (options.listen.port < 0 || options.listen.port > 65535) {
    return invalid_input("port must be in [0, 65535], got " + std::to_string(options.listen.port));
  }
  return std::unique_ptr<HttpService>(new HttpServiceImpl(ledger, std::move(options)));
}

Result<ListenAddress> parse_listen_address(std::string_view text) {
  const std::string t(text);
  const auto colon = t.rfind(':');
  const std::string accepted =
      "; accepted: HOST:PORT with an IPv4 address or 'localhost' and a port in [0, 65535], e.g. "
      "127.0.0.1:8742";
  if (colon == std::string::npos) return invalid_input("--listen '" + t + "' has no port" + accepted);
  ListenAddress a;
  a.host = t.substr(0, colon);
  if (a.host.empty()) a.host = "127.0.0.1";
  const std::string port = t.substr(colon + 1);
  int value = -1;
  auto [p, ec] = std::from_chars(port.data(), port.data() + port.size(), value);
  if (port.empty() || ec != std::errc() || p != port.data() + port.size() || value < 0 || value > 65535) {
    return invalid_input("--listen '" + t + "': bad port '" + port + "'" + accepted);
  }
  a.port = value;
  in_addr addr{};
  if (a.host != "localhost" && inet_pton(AF_INET, a.host.c_str(), &addr) != 1) {
    return invalid_input("--listen '" + t + "': bad host '" + a.host + "'" + accepted);
  }
  return a;
}

bool is_loopback_host(std::string_view host) {
  if (host == "localhost") return true;
  in_addr addr{};
  const std::string h(host);
  if (inet_pton(AF_INET, h.c_str(), &addr) != 1) return false;
  return (ntohl(addr.s_addr) >> 24) == 127;
}

Result<std::string> read_token_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    return invalid_input("--token-file " + path + ": cannot open the file (does it exist, can it be read?)");
  std::string line;
  std::getline(in, line);
  std::size_t b = 0, e = line.size();
  while (b < e && (line[b] == ' ' || line[b] == '\t' || line[b] == '\r')) ++b;
  while (e > b && (line[e - 1] == ' ' || line[e - 1] == '\t' || line[e - 1] == '\r')) --e;
  std::string token = line.substr(b, e - b);
  if (token.empty())
    return invalid_input("--token-file " + path + ": the first line is empty; it must hold the token");
  for (char c : token) {
    const auto u = static_cast<unsigned char>(c);
    if (u <= 0x20 || u >= 0x7f) {
      return invalid_input("--token-file " + path +
                           ": the token must be visible ASCII characters without spaces");
    }
  }
  return token;
}

}  // namespace alphaledger
