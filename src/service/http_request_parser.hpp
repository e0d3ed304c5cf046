// The connection state of the HTTP server and the reading of requests from it (project-internal):
// request line, headers, body framing (Content-Length or chunked) and their limits. The loop that
// owns the connections is in http_server.cpp; this part is pure parsing over a Conn's bytes.
#pragma once

#include <chrono>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

#include "service/http_server.hpp"

namespace alphaledger::http {

using Clock = std::chrono::steady_clock;

inline std::string lower(std::string_view s) {
  std::string out(s);
  for (char& c : out)
    if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
  return out;
}

// A protocol failure found while reading a request.
struct Refusal {
  int status;
  std::string what;
};

// kDraining: answered and closing; what the client still sends is read and dropped for a moment
// so that closing does not reset the connection before the client has read the answer.
enum class State { kIdle, kHead, kBody, kHandling, kWriting, kDraining };

struct Conn {
  int fd = -1;
  std::string remote;
  State state = State::kIdle;
  std::string in;   // bytes read and not yet consumed
  std::string out;  // bytes to write
  std::size_t out_done = 0;
  bool close_after_write = false;
  Clock::time_point deadline;
  Clock::time_point started;  // the current request's first byte
  std::size_t served = 0;
  Request req;
  // Body framing of the current request.
  bool chunked = false;
  std::size_t content_length = 0;
  enum class Chunk { kSize, kData, kDataEnd, kTrailer } chunk = Chunk::kSize;
  std::size_t chunk_left = 0;
  std::size_t trailer_bytes = 0;
  bool keep_alive = true;
  std::size_t drained = 0;
};

// Reads requests out of a connection's input bytes under the server's limits. Each call consumes
// what it used from `c.in`; `complete` says whether the part it reads is whole yet. A Refusal is the
// status (400, 413, 431) and the plain words of what was wrong.
class RequestParser {
 public:
  explicit RequestParser(const ServerOptions& options) : options_(options) {}
  // The request line and headers into c.req.
  std::optional<Refusal> parse_head(Conn& c, bool& complete) const;
  // The body framing of c.req (Content-Length or chunked), into c.
  std::optional<Refusal> framing(Conn& c) const;
  Refusal too_large() const;
  // The body (whole, or chunk by chunk) into c.req.body.
  std::optional<Refusal> read_body(Conn& c, bool& complete) const;

 private:
  const ServerOptions& options_;
};

}  // namespace alphaledger::http
