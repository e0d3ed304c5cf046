// The state of one HTTP server (Server::Impl), shared by its files; internal to the service:
//   http_server.cpp       binding, starting and stopping; the status line of an answer
//   http_server_loop.cpp  the poll loop, reading requests, the workers, writing answers
#pragma once

#include <poll.h>
#include <sys/eventfd.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <mutex>
#include <optional>
#include <string>
#include <thread>
#include <unordered_map>
#include <utility>
#include <vector>

#include "service/http_request_parser.hpp"
#include "service/http_server.hpp"

namespace alphaledger::http {

struct Server::Impl {
  ServerOptions options;
  Handlers handlers;
  int listen_fd = -1;
  int wake_fd = -1;
  std::atomic<bool> stopping{false};

  // Workers.
  std::mutex jobs_mu;
  std::condition_variable jobs_cv;
  std::deque<std::pair<std::uint64_t, Request>> jobs;
  bool workers_quit = false;
  std::vector<std::thread> workers;

  // Finished answers, handed back to the loop.
  struct Done {
    std::uint64_t conn;
    Response response;
  };
  std::mutex done_mu;
  std::vector<Done> done;

  std::unordered_map<std::uint64_t, Conn> conns;
  std::uint64_t next_id = 1;

  Impl(ServerOptions o, Handlers h) : options(std::move(o)), handlers(std::move(h)) {
    wake_fd = ::eventfd(0, EFD_NONBLOCK | EFD_CLOEXEC);
  }
  ~Impl() {
    if (listen_fd >= 0) ::close(listen_fd);
    for (auto& [id, c] : conns) ::close(c.fd);
    if (wake_fd >= 0) ::close(wake_fd);
  }

  void wake() {
    const std::uint64_t one = 1;
    [[maybe_unused]] const ssize_t n = ::write(wake_fd, &one, sizeof one);
  }

  // ---- answers ---------------------------------------------------------------------------

  std::string serialize(const Response& r, bool close) const;

  double ms_since(Clock::time_point t) const {
    return std::chrono::duration<double, std::milli>(Clock::now() - t).count();
  }

  // Queues an answer on the connection and starts writing it.
  void answer(Conn& c, const Response& r);

  void refuse(Conn& c, const Refusal& r);

  // ---- reading a request -----------------------------------------------------------------

  // Parses the head once it is complete. Returns false while more bytes are needed.
  // Request parsing (http_request_parser.cpp).
  RequestParser parser{options};
  std::optional<Refusal> parse_head(Conn& c, bool& complete) { return parser.parse_head(c, complete); }
  std::optional<Refusal> framing(Conn& c) { return parser.framing(c); }
  Refusal too_large() const { return parser.too_large(); }
  std::optional<Refusal> read_body(Conn& c, bool& complete) { return parser.read_body(c, complete); }
  void advance(std::uint64_t id, Conn& c);

  // ---- workers ---------------------------------------------------------------------------

  void worker();

  // ---- the loop --------------------------------------------------------------------------

  void close_conn(std::uint64_t id);

  // Writes what it can; returns false if the connection is to be closed now.
  bool flush(Conn& c);

  // Reads what c.in holds and writes what c.out holds, as far as both go without waiting.
  // Returns false if the connection is to be closed now.
  bool pump(std::uint64_t id, Conn& c);

  void accept_all(bool& accept_paused_until_set, Clock::time_point& accept_paused_until);

  void take_done();

  // One connection's poll events: reads (or drains) what arrived and moves the request on, or
  // writes what is pending. False: close the connection.
  bool on_events(std::uint64_t id, Conn& c, short revents);

  // Requests past their deadline get 408; idle connections past keep-alive are closed.
  void expire_deadlines();

  void loop();
};

}  // namespace alphaledger::http
