// A small HTTP/1.1 server for `serve` (internal to the service layer; docs/http.md "Limits").
//
// One thread runs a poll() loop that accepts connections and reads every request in full (headers,
// then the body by Content-Length or chunked) without blocking; only complete requests reach the
// worker threads, so a slow or stalled client costs a file descriptor, never a worker. Each
// request has one deadline for its headers and body together; a client that misses it gets 408
// and is disconnected. Limits: header section size, body size (also while decoding chunks),
// connections. The answer is written by the loop too, with the same deadline.
//
// Example:
//   http::Handlers h;
//   h.on_request = [](const http::Request& r) { return http::Response{200, "{}\n"}; };
//   http::Server server(http::ServerOptions{}, std::move(h));
//   auto port = server.bind("127.0.0.1", 0);
//   server.run();  // until stop() from another thread
//
// Thread-safety: stop() from any thread; on_head and on_protocol_error run on the loop thread,
// on_request and on_done on worker threads (on_done also on the loop thread), concurrently.
#pragma once

#include <atomic>
#include <chrono>
#include <cstddef>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "alphaledger/result.hpp"

namespace alphaledger::http {

// The value of one hexadecimal digit (either case), or -1 for any other character. Chunk sizes
// and percent escapes both use it.
inline int hex_digit(char c) {
  if (c >= '0' && c <= '9') return c - '0';
  if (c >= 'a' && c <= 'f') return c - 'a' + 10;
  if (c >= 'A' && c <= 'F') return c - 'A' + 10;
  return -1;
}

struct Request {
  std::string method;                                        // as sent, e.g. "GET"
  std::string target;                                        // as sent, e.g. "/v1/streams?x=1"
  std::string path;                                          // target before '?', not decoded
  std::string query;                                         // after '?', not decoded ("" when absent)
  int minor_version = 1;                                     // HTTP/1.<minor>
  std::vector<std::pair<std::string, std::string>> headers;  // names in lower case, values trimmed
  std::string body;                                          // decoded (chunks joined)
  std::string remote;                                        // "127.0.0.1:53122"
  // The first header of that name (lower case), or nullptr.
  const std::string* header(std::string_view lower_name) const;
};

struct Response {
  int status = 200;
  std::string body;                                          // sent as application/json
  std::vector<std::pair<std::string, std::string>> headers;  // extra headers
  bool close = false;                                        // close the connection after it
};

struct ServerOptions {
  std::size_t threads = 32;              // worker threads (requests handled at once)
  std::size_t max_body_bytes = 65536;    // larger bodies: 413, connection closed
  std::size_t max_header_bytes = 16384;  // request line and headers: 431 above it
  std::size_t max_headers = 100;         // header lines: 431 above it
  std::size_t max_connections = 4096;    // more are accepted and closed at once
  std::size_t max_requests_per_connection = 1000;
  std::chrono::milliseconds request_timeout{10000};    // first byte to last byte of a request
  std::chrono::milliseconds keep_alive_timeout{5000};  // idle time between requests
};

struct Handlers {
  // After the headers, before the body is read (loop thread; must be quick). A response here is
  // sent at once, the body is never read and the connection is closed (e.g. 401).
  std::function<std::optional<Response>(const Request&)> on_head;
  // A complete request (worker thread).
  std::function<Response(const Request&)> on_request;
  // The answer to a request the server refuses itself: 400 (malformed), 408 (too slow), 413
  // (body too large), 431 (headers too large). `what` says what was wrong, in plain words.
  std::function<Response(int status, const std::string& what)> on_protocol_error;
  // After each answer is handed to the connection: the request (method/path may be empty for a
  // malformed one), the answer, and the time since the request's first byte, in milliseconds.
  std::function<void(const Request&, const Response&, double ms)> on_done;
};

class Server {
 public:
  Server(ServerOptions options, Handlers handlers);
  ~Server();
  Server(const Server&) = delete;
  Server& operator=(const Server&) = delete;

  // Binds and listens (backlog 1024, no SO_REUSEPORT: a second server on the same address is
  // refused). host: IPv4 dotted quad or "localhost". Returns the port. kBusy when the address is in use,
  // kIOError for other failures, naming the address and the reason.
  Result<int> bind(const std::string& host, int port);
  // Serves until stop(): then stops accepting, closes idle and half-read connections, finishes the
  // requests being handled and writes their answers, and returns. REQUIRES: bind() succeeded.
  void run();
  void stop();

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace alphaledger::http
