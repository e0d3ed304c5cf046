// alphaledger serve: the HTTP/JSON routes of CONTRACT.md "Service" (docs/http.md).
#include <arpa/inet.h>
#include <httplib.h>

#include <atomic>
#include <charconv>
#include <chrono>
#include <fstream>
#include <shared_mutex>
#include <unordered_set>

#include "alphaledger/service.hpp"
#include "alphaledger/test_log.hpp"

namespace alphaledger {
namespace {

using Json = nlohmann::ordered_json;
using Clock = std::chrono::steady_clock;

// When the request being handled on this worker thread started (set before routing).
thread_local Clock::time_point t_request_start{};

void send_json(httplib::Response& res, int status, const Json& body) {
  res.status = status;
  res.set_content(dump_json(body) + "\n", "application/json");
}

void send_error(httplib::Response& res, int status, std::string_view code, const std::string& message) {
  Json j;
  j["error"]["code"] = std::string(code);
  j["error"]["message"] = message;
  send_json(res, status, j);
}

// Ledger errors to HTTP (docs/http.md "Errors"). kRefused is a conflict here: unknown streams are
// recognised before the ledger is asked (see HttpServiceImpl::stream_exists).
void send_ledger_error(httplib::Response& res, const Error& e) {
  switch (e.kind) {
    case ErrorKind::kInvalidInput:
      send_error(res, 400, "invalid_input", e.message);
      return;
    case ErrorKind::kRefused:
      send_error(res, 409, "conflict", e.message);
      return;
    case ErrorKind::kStorage:
      send_error(res, 503, "storage", e.message);
      return;
  }
  send_error(res, 500, "internal", e.message);
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

// Parses a request body that must be a JSON object. On failure fills `res` and returns nullopt.
std::optional<nlohmann::json> json_body(const httplib::Request& req, httplib::Response& res,
                                        std::string_view example) {
  auto j = parse_json_object(req.body);
  if (!j) {
    // Valid JSON that is not an object is invalid input; text that is not JSON is invalid JSON.
    const bool not_object = j.error().message.rfind("expected a JSON object", 0) == 0;
    send_error(res, 400, not_object ? "invalid_input" : "invalid_json",
               "the request body: " + j.error().message + " (for this route: " + std::string(example) + ")");
    return std::nullopt;
  }
  return std::move(j).value();
}

constexpr std::string_view kCreateExample = R"({"name": "checkout-team", "rule": "lord++", "alpha": 0.05})";
constexpr std::string_view kDecideExample = R"({"id": "exp-0142", "p_value": 0.0004})";

// The create body: name and rule (strings) plus the optional rule parameters. Unknown keys are
// refused so that a misspelt parameter cannot silently fall back to its default.
Result<std::pair<std::string, RuleSpec>> create_request(const nlohmann::json& j) {
  static const char* kNumbers[] = {"alpha", "initial_wealth", "candidate_threshold", "discard_threshold",
                                   "payout"};
  static const char* kTexts[] = {"name", "rule", "spending", "evaluation"};
  for (auto it = j.begin(); it != j.end(); ++it) {
    const std::string& key = it.key();
    bool known = false;
    for (const char* k : kNumbers) known = known || key == k;
    for (const char* k : kTexts) known = known || key == k;
    if (!known) {
      return invalid_input("unknown field '" + key +
                           "'; accepted: name, rule, alpha, initial_wealth, "
                           "candidate_threshold, discard_threshold, payout, spending, evaluation");
    }
    if (it.value().is_null()) continue;
    bool numeric = false;
    for (const char* k : kNumbers) numeric = numeric || key == k;
    if (numeric && !it.value().is_number()) {
      return invalid_input(key + " must be a JSON number, got " +
                           it.value().dump(-1, ' ', false, nlohmann::json::error_handler_t::replace));
    }
    if (!numeric && !it.value().is_string()) {
      return invalid_input(key + " must be a JSON string, got " +
                           it.value().dump(-1, ' ', false, nlohmann::json::error_handler_t::replace));
    }
  }
  auto text = [&](const char* key) -> std::optional<std::string> {
    auto it = j.find(key);
    if (it == j.end() || it->is_null()) return std::nullopt;
    return it->get<std::string>();
  };
  auto num = [&](const char* key) -> std::optional<double> {
    auto it = j.find(key);
    if (it == j.end() || it->is_null()) return std::nullopt;
    return it->get<double>();
  };
  auto name = text("name");
  if (!name) return invalid_input("missing field 'name' (1 to 128 letters, digits, '-', '_' or '.')");
  auto rule = text("rule");
  if (!rule)
    return invalid_input(
        "missing field 'rule' (alpha-spending, alpha-investing, lond, lord++, saffron or addis)");
  RuleSpec spec;
  spec.rule = *rule;
  spec.alpha = num("alpha");
  spec.initial_wealth = num("initial_wealth");
  spec.candidate_threshold = num("candidate_threshold");
  spec.discard_threshold = num("discard_threshold");
  spec.payout = num("payout");
  spec.spending = text("spending");
  spec.evaluation = text("evaluation");
  return std::make_pair(*name, spec);
}

class HttpServiceImpl final : public HttpService {
 public:
  HttpServiceImpl(Ledger& ledger, HttpOptions options)
      : ledger_(ledger), options_(std::move(options)), queue_(ledger) {
    const std::size_t threads = options_.threads;
    server_.new_task_queue = [threads] { return new httplib::ThreadPool(threads); };
    server_.set_payload_max_length(options_.max_body_bytes);
    server_.set_read_timeout(options_.io_timeout_seconds, 0);
    server_.set_write_timeout(options_.io_timeout_seconds, 0);
    server_.set_keep_alive_timeout(options_.keep_alive_seconds);
    server_.set_keep_alive_max_count(1000);
    server_.set_tcp_nodelay(true);
    routes();
  }

  Result<int> bind() override {
    const ListenAddress& a = options_.listen;
    const std::string where = a.host + ":" + std::to_string(a.port);
    if (a.port == 0) {
      const int port = server_.bind_to_any_port(a.host);
      if (port <= 0) return storage_error("cannot listen on " + where + " (is the address local?)");
      return port;
    }
    if (!server_.bind_to_port(a.host, a.port)) {
      return storage_error("cannot listen on " + where +
                           " (in use by another process, or not a local address)");
    }
    return a.port;
  }

  Status run() override {
    if (!stop_requested_.load()) server_.listen_after_bind();
    return {};
  }

  void stop() override {
    stop_requested_ = true;
    server_.stop();
  }

 private:
  using Handler = std::function<void(const httplib::Request&, httplib::Response&)>;

  // Every route checks the token before anything else (so a refused request changes nothing).
  Handler guarded(Handler inner) {
    return [this, inner = std::move(inner)](const httplib::Request& req, httplib::Response& res) {
      if (!authorized(req, res)) return;
      inner(req, res);
    };
  }

  bool authorized(const httplib::Request& req, httplib::Response& res) {
    if (!options_.token) return true;
    const std::string header = req.get_header_value("Authorization");
    constexpr std::string_view kScheme = "Bearer ";
    if (header.size() > kScheme.size() && header.compare(0, kScheme.size(), kScheme) == 0 &&
        same_secret(std::string_view(header).substr(kScheme.size()), *options_.token)) {
      return true;
    }
    res.set_header("WWW-Authenticate", "Bearer realm=\"alphaledger\"");
    send_error(res, 401, "unauthorized",
               header.empty() ? "this server needs an 'Authorization: Bearer <token>' header"
                              : "the bearer token is not the one this server was started with");
    return false;
  }

  // Streams are never deleted, so one that was seen once is known for good.
  // Returns false (and fills `res`) when the stream does not exist or the lookup failed.
  bool stream_exists(const std::string& name, httplib::Response& res) {
    {
      std::shared_lock<std::shared_mutex> lock(known_mutex_);
      if (known_.count(name) != 0) return true;
    }
    auto s = ledger_.status(name);
    if (s) {
      remember(name);
      return true;
    }
    if (s.error().kind == ErrorKind::kRefused) {
      send_error(res, 404, "unknown_stream",
                 "no stream named '" + name + "'; create it with POST /v1/streams");
    } else {
      send_ledger_error(res, s.error());
    }
    return false;
  }

  void remember(const std::string& name) {
    std::unique_lock<std::shared_mutex> lock(known_mutex_);
    known_.insert(name);
  }

  void routes() {
    server_.set_pre_routing_handler([](const httplib::Request&, httplib::Response&) {
      t_request_start = Clock::now();
      return httplib::Server::HandlerResponse::Unhandled;
    });

    server_.Get("/v1/health", guarded([](const httplib::Request&, httplib::Response& res) {
                  Json j;
                  j["status"] = "ok";
                  send_json(res, 200, j);
                }));

    server_.Get("/v1/streams", guarded([this](const httplib::Request&, httplib::Response& res) {
                  auto list = ledger_.streams();
                  if (!list) return send_ledger_error(res, list.error());
                  Json j;
                  j["streams"] = Json::array();
                  for (const auto& s : *list) j["streams"].push_back(stream_to_json(s));
                  send_json(res, 200, j);
                }));

    server_.Post("/v1/streams", guarded([this](const httplib::Request& req, httplib::Response& res) {
                   auto body = json_body(req, res, kCreateExample);
                   if (!body) return;
                   auto parsed = create_request(*body);
                   if (!parsed) return send_error(res, 400, "invalid_input", parsed.error().message);
                   auto config = resolve_config(parsed->second);
                   if (!config) return send_error(res, 400, "invalid_input", config.error().message);
                   auto created = ledger_.create_stream(parsed->first, *config);
                   if (!created) return send_ledger_error(res, created.error());
                   remember(parsed->first);
                   send_json(res, created->created ? 201 : 200, stream_to_json(created->info));
                 }));

    server_.Get(R"(/v1/streams/([^/]+))",
                guarded([this](const httplib::Request& req, httplib::Response& res) {
                  const std::string name = req.matches[1];
                  if (!stream_exists(name, res)) return;
                  auto s = ledger_.status(name);
                  if (!s) return send_ledger_error(res, s.error());
                  send_json(res, 200, stream_to_json(*s));
                }));

    server_.Get(R"(/v1/streams/([^/]+)/next)",
                guarded([this](const httplib::Request& req, httplib::Response& res) {
                  const std::string name = req.matches[1];
                  if (!stream_exists(name, res)) return;
                  auto s = ledger_.status(name);
                  if (!s) return send_ledger_error(res, s.error());
                  Json j;
                  j["stream"] = name;
                  j["step"] = s->tests + 1;
                  j["level"] = s->next_level;
                  send_json(res, 200, j);
                }));

    server_.Post(R"(/v1/streams/([^/]+)/tests)",
                 guarded([this](const httplib::Request& req, httplib::Response& res) {
                   const std::string name = req.matches[1];
                   auto body = json_body(req, res, kDecideExample);
                   if (!body) return;
                   auto input = test_from_json(*body);
                   if (!input) return send_error(res, 400, "invalid_input", input.error().message);
                   if (!stream_exists(name, res)) return;
                   auto d = queue_.decide(name, input->id, input->p_value);
                   if (!d) return send_ledger_error(res, d.error());
                   res.status = d->repeat ? 200 : 201;
                   res.set_content(decision_json(*d) + "\n", "application/json");
                 }));

    server_.Get(R"(/v1/streams/([^/]+)/history)",
                guarded([this](const httplib::Request& req, httplib::Response& res) {
                  const std::string name = req.matches[1];
                  if (!stream_exists(name, res)) return;
                  auto s = ledger_.status(name);
                  if (!s) return send_ledger_error(res, s.error());
                  auto h = ledger_.history(name);
                  if (!h) return send_ledger_error(res, h.error());
                  const std::string_view rule = rule_name(s->config.kind);
                  Json j;
                  j["stream"] = name;
                  j["decisions"] = Json::array();
                  for (const auto& r : *h) j["decisions"].push_back(history_row_to_json(r, rule));
                  send_json(res, 200, j);
                }));

    // Called for every response with status >= 400; fills in a JSON error where no handler did
    // (unknown routes, bodies over the limit, malformed HTTP).
    server_.set_error_handler(httplib::Server::HandlerWithResponse([this](const httplib::Request& req,
                                                                          httplib::Response& res) {
      if (!res.body.empty()) return httplib::Server::HandlerResponse::Unhandled;
      if (res.status == 404 && !authorized(req, res)) return httplib::Server::HandlerResponse::Handled;
      switch (res.status) {
        case 404:
          send_error(
              res, 404, "unknown_route",
              "no route " + req.method + " " + req.path +
                  "; routes: GET /v1/health, GET|POST /v1/streams, GET /v1/streams/{name}, GET "
                  "/v1/streams/{name}/next, POST /v1/streams/{name}/tests, GET /v1/streams/{name}/history");
          break;
        case 413:
          send_error(res, 413, "too_large",
                     "the request body is larger than " + std::to_string(options_.max_body_bytes) + " bytes");
          break;
        case 400:
          send_error(res, 400, "invalid_request", "malformed HTTP request");
          break;
        default:
          send_error(res, res.status, "http_error", "HTTP status " + std::to_string(res.status));
      }
      return httplib::Server::HandlerResponse::Handled;
    }));

    server_.set_exception_handler([](const httplib::Request&, httplib::Response& res, std::exception_ptr ep) {
      std::string what = "unknown exception";
      try {
        if (ep) std::rethrow_exception(ep);
      } catch (const std::exception& e) {
        what = e.what();
      } catch (...) {
      }
      send_error(res, 500, "internal", "internal error: " + what);
    });

    server_.set_logger([this](const httplib::Request& req, const httplib::Response& res) {
      if (!options_.access_log) return;
      AccessLogEntry e;
      e.remote = req.remote_addr + ":" + std::to_string(req.remote_port);
      e.method = req.method;
      e.path = req.path;
      e.status = res.status;
      e.bytes = res.body.size();
      if (t_request_start != Clock::time_point{}) {
        e.ms = std::chrono::duration<double, std::milli>(Clock::now() - t_request_start).count();
        t_request_start = Clock::time_point{};
      }
      options_.access_log(e);
    });
  }

  Ledger& ledger_;
  HttpOptions options_;
  DecisionQueue queue_;
  httplib::Server server_;
  std::atomic<bool> stop_requested_{false};
  std::shared_mutex known_mutex_;
  std::unordered_set<std::string> known_;
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
