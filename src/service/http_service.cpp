// alphaledger serve: HttpService over the small HTTP server of http_server.hpp, the answers
// every route shares (errors and their HTTP statuses), and the options' readers (docs/http.md).
// The routes themselves are in http_routes.cpp, the request readers in http_requests.cpp.
#include <arpa/inet.h>

#include <atomic>
#include <charconv>
#include <chrono>
#include <fstream>
#include <mutex>

#include "alphaledger/forms.hpp"
#include "alphaledger/service.hpp"
#include "alphaledger/test_log.hpp"
#include "service/error_status.hpp"
#include "service/http_requests.hpp"
#include "service/http_routes.hpp"
#include "service/http_server.hpp"

namespace alphaledger {
namespace routes {

using http::Request;
using http::Response;
using http::ErrorStatus;
using http::error_status;

Response json_answer(int status, std::string body) {
  body += '\n';
  return Response{status, std::move(body), {}, false};
}

Response error_response(int status, std::string_view code, const std::string& message) {
  return json_answer(status, error_json(code, message));
}

// Ledger errors to HTTP: the table is service/error_status.cpp.
Response ledger_error(const Error& e) {
  const ErrorStatus mapped = error_status(e);
  return error_response(mapped.status, mapped.code, e.message);
}

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

}  // namespace routes

namespace {

using http::Request;
using http::Response;
using routes::error_response;
using routes::Routes;

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
      return routes::protocol_error(status, what, max_body);
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
  if (colon == std::string::npos) return invalid_input("listen address '" + t + "' has no port" + accepted);
  ListenAddress a;
  a.host = t.substr(0, colon);
  if (a.host.empty()) a.host = "127.0.0.1";
  const std::string port = t.substr(colon + 1);
  int value = -1;
  auto [p, ec] = std::from_chars(port.data(), port.data() + port.size(), value);
  if (port.empty() || ec != std::errc() || p != port.data() + port.size() || value < 0 || value > 65535) {
    return invalid_input("listen address '" + t + "': bad port '" + port + "'" + accepted);
  }
  a.port = value;
  in_addr addr{};
  if (a.host != "localhost" && inet_pton(AF_INET, a.host.c_str(), &addr) != 1) {
    return invalid_input("listen address '" + t + "': bad host '" + a.host + "'" + accepted);
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
    return invalid_input("token file " + path + ": cannot open the file (does it exist, can it be read?)");
  std::string line;
  std::getline(in, line);
  std::size_t b = 0, e = line.size();
  while (b < e && (line[b] == ' ' || line[b] == '\t' || line[b] == '\r')) ++b;
  while (e > b && (line[e - 1] == ' ' || line[e - 1] == '\t' || line[e - 1] == '\r')) --e;
  std::string token = line.substr(b, e - b);
  if (token.empty())
    return invalid_input("token file " + path + ": the first line is empty; it must hold the token");
  for (char c : token) {
    const auto u = static_cast<unsigned char>(c);
    if (u <= 0x20 || u >= 0x7f) {
      return invalid_input("token file " + path +
                           ": the token must be visible ASCII characters without spaces");
    }
  }
  return token;
}

}  // namespace alphaledger
