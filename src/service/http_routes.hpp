// The HTTP routes over one ledger (project-internal; docs/http.md): a table of routes, each a
// short member function. HttpService (http_service.cpp) owns one Routes and hands it each request.
#pragma once

#include <mutex>
#include <optional>
#include <string>

#include "alphaledger/service.hpp"
#include "service/http_server.hpp"

namespace alphaledger::routes {

class Routes {
 public:
  Routes(Ledger& ledger, const HttpOptions& options) : ledger_(ledger), options_(options), queue_(ledger) {}

  // Before the body is read: the token. A refused request changes nothing and its body is never
  // read.
  std::optional<http::Response> check_token(const http::Request& req) const;
  // The answer of the route the request names, or 404 naming every route.
  http::Response dispatch(const http::Request& req);
  // Streams for which the DecisionQueue holds a lane right now (for tests).
  std::size_t queue_lanes() const { return queue_.lane_count(); }

 private:
  // Every route handler: the request and the stream name of the path ("" when it has none).
  using Handler = http::Response (Routes::*)(const http::Request& req, const std::string& stream);
  struct Route {
    std::string_view method;
    std::string_view path;  // segments after /v1/, "*" standing for the stream name
    Handler handler;
  };
  static const Route kRoutes[];

  http::Response health(const http::Request& req, const std::string& stream);
  http::Response list_streams(const http::Request& req, const std::string& stream);
  http::Response create_stream(const http::Request& req, const std::string& stream);
  http::Response stream_status(const http::Request& req, const std::string& stream);
  http::Response next_level(const http::Request& req, const std::string& stream);
  http::Response decide(const http::Request& req, const std::string& stream);
  http::Response history(const http::Request& req, const std::string& stream);
  http::Response close(const http::Request& req, const std::string& stream);
  http::Response verify(const http::Request& req, const std::string& stream);
  http::Response launch(const http::Request& req, const std::string& stream);
  http::Response abandon(const http::Request& req, const std::string& stream);
  http::Response running(const http::Request& req, const std::string& stream);
  http::Response look(const http::Request& req, const std::string& stream);
  http::Response list_looks(const http::Request& req, const std::string& stream);

  // Remembers the outcome of a write for health(): a storage failure makes it 503 until a later
  // write succeeds.
  void note_write(const Error* failure);
  // The stream's status, or the answer for a stream that does not exist (404) or cannot be read.
  Result<StreamInfo> find_stream(const std::string& name, http::Response& error);

  Ledger& ledger_;
  const HttpOptions& options_;
  DecisionQueue queue_;
  std::mutex health_mu_;
  std::optional<std::string> storage_failure_;
};

}  // namespace alphaledger::routes
