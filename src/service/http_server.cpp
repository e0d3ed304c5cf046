// The poll()-based HTTP/1.1 server of `serve` (see http_server.hpp).
#include "service/http_server.hpp"

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/eventfd.h>
#include <sys/socket.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <condition_variable>
#include <cstring>
#include <deque>
#include <mutex>
#include <thread>
#include <unordered_map>

#include "alphaledger/text.hpp"
#include "service/http_request_parser.hpp"

namespace alphaledger::http {
namespace {

const char* reason(int status) {
  switch (status) {
    case 100:
      return "Continue";
    case 200:
      return "OK";
    case 201:
      return "Created";
    case 400:
      return "Bad Request";
    case 401:
      return "Unauthorized";
    case 404:
      return "Not Found";
    case 408:
      return "Request Timeout";
    case 409:
      return "Conflict";
    case 413:
      return "Payload Too Large";
    case 431:
      return "Request Header Fields Too Large";
    case 500:
      return "Internal Server Error";
    case 503:
      return "Service Unavailable";
    default:
      return "Status";
  }
}

}  // namespace

const std::string* Request::header(std::string_view lower_name) const {
  for (const auto& [k, v] : headers)
    if (k == lower_name) return &v;
  return nullptr;
}

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

  std::string serialize(const Response& r, bool close) const {
    std::string s = "HTTP/1.1 " + std::to_string(r.status) + " " + reason(r.status) + "\r\n";
    s += "Content-Type: application/json\r\n";
    s += "Content-Length: " + std::to_string(r.body.size()) + "\r\n";
    for (const auto& [k, v] : r.headers) s += k + ": " + v + "\r\n";
    if (close) {
      s += "Connection: close\r\n";
    } else {
      s += "Keep-Alive: timeout=" + std::to_string(options.keep_alive_timeout.count() / 1000) +
           ", max=" + std::to_string(options.max_requests_per_connection) + "\r\n";
    }
    s += "\r\n";
    s += r.body;
    return s;
  }

  double ms_since(Clock::time_point t) const {
    return std::chrono::duration<double, std::milli>(Clock::now() - t).count();
  }

  // Queues an answer on the connection and starts writing it.
  void answer(Conn& c, const Response& r) {
    const bool close =
        r.close || !c.keep_alive || stopping.load() || c.served + 1 >= options.max_requests_per_connection;
    c.out += serialize(r, close);
    c.close_after_write = c.close_after_write || close;
    c.state = State::kWriting;
    c.deadline = Clock::now() + options.request_timeout;
    ++c.served;
  }

  void refuse(Conn& c, const Refusal& r) {
    Response res = handlers.on_protocol_error ? handlers.on_protocol_error(r.status, r.what)
                                              : Response{r.status, r.what + "\n", {}, true};
    res.close = true;
    answer(c, res);
    if (handlers.on_done) handlers.on_done(c.req, res, ms_since(c.started));
  }

  // ---- reading a request -----------------------------------------------------------------

  // Parses the head once it is complete. Returns false while more bytes are needed.
  // Request parsing (http_request_parser.cpp).
  RequestParser parser{options};
  std::optional<Refusal> parse_head(Conn& c, bool& complete) { return parser.parse_head(c, complete); }
  std::optional<Refusal> framing(Conn& c) { return parser.framing(c); }
  Refusal too_large() const { return parser.too_large(); }
  std::optional<Refusal> read_body(Conn& c, bool& complete) { return parser.read_body(c, complete); }
  void advance(std::uint64_t id, Conn& c) {
    while (true) {
      if (c.state == State::kIdle) {
        if (c.in.empty()) return;
        c.state = State::kHead;
        c.started = Clock::now();
        c.deadline = c.started + options.request_timeout;
        c.req = Request{};
        c.req.remote = c.remote;
      }
      if (c.state == State::kHead) {
        bool complete = false;
        if (auto r = parse_head(c, complete)) return refuse(c, *r);
        if (!complete) return;
        if (auto r = framing(c)) return refuse(c, *r);
        if (handlers.on_head) {
          if (auto early = handlers.on_head(c.req)) {
            early->close = true;  // the body, if any, is never read
            answer(c, *early);
            if (handlers.on_done) handlers.on_done(c.req, *early, ms_since(c.started));
            return;
          }
        }
        if (!c.chunked && c.content_length > options.max_body_bytes) return refuse(c, too_large());
        const std::string* expect = c.req.header("expect");
        if (expect && lower(*expect) == "100-continue" && (c.chunked || c.content_length > 0) &&
            c.in.empty()) {
          c.out += "HTTP/1.1 100 Continue\r\n\r\n";
        }
        c.state = State::kBody;
      }
      if (c.state == State::kBody) {
        bool complete = false;
        if (auto r = read_body(c, complete)) return refuse(c, *r);
        if (!complete) return;
        c.state = State::kHandling;
        {
          std::lock_guard<std::mutex> lock(jobs_mu);
          jobs.emplace_back(id, std::move(c.req));
        }
        jobs_cv.notify_one();
        c.req = Request{};
        return;
      }
      return;  // handling or writing: nothing to read now
    }
  }

  // ---- workers ---------------------------------------------------------------------------

  void worker() {
    while (true) {
      std::pair<std::uint64_t, Request> job;
      {
        std::unique_lock<std::mutex> lock(jobs_mu);
        jobs_cv.wait(lock, [&] { return workers_quit || !jobs.empty(); });
        if (jobs.empty()) return;
        job = std::move(jobs.front());
        jobs.pop_front();
      }
      const auto t0 = Clock::now();
      Response res;
      try {
        res = handlers.on_request(job.second);
      } catch (...) {
        res = handlers.on_protocol_error ? handlers.on_protocol_error(500, "internal error")
                                         : Response{500, "internal error\n", {}, false};
      }
      if (handlers.on_done) {
        try {
          handlers.on_done(job.second, res, ms_since(t0));
        } catch (...) {
        }
      }
      {
        std::lock_guard<std::mutex> lock(done_mu);
        done.push_back({job.first, std::move(res)});
      }
      wake();
    }
  }

  // ---- the loop --------------------------------------------------------------------------

  void close_conn(std::uint64_t id) {
    auto it = conns.find(id);
    if (it == conns.end()) return;
    ::close(it->second.fd);
    conns.erase(it);
  }

  // Writes what it can; returns false if the connection is to be closed now.
  bool flush(Conn& c) {
    while (c.out_done < c.out.size()) {
      const ssize_t n = ::send(c.fd, c.out.data() + c.out_done, c.out.size() - c.out_done, MSG_NOSIGNAL);
      if (n > 0) {
        c.out_done += static_cast<std::size_t>(n);
        continue;
      }
      if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) return true;
      if (n < 0 && errno == EINTR) continue;
      return false;
    }
    c.out.clear();
    c.out_done = 0;
    if (c.state == State::kWriting) {
      if (c.close_after_write) {
        ::shutdown(c.fd, SHUT_WR);
        c.state = State::kDraining;
        c.in.clear();
        c.deadline = Clock::now() + std::chrono::seconds(2);
        return true;
      }
      c.state = State::kIdle;
      c.deadline = Clock::now() + options.keep_alive_timeout;
    }
    return true;
  }

  // Reads what c.in holds and writes what c.out holds, as far as both go without waiting.
  // Returns false if the connection is to be closed now.
  bool pump(std::uint64_t id, Conn& c) {
    for (int round = 0; round < 64; ++round) {
      advance(id, c);
      if (c.out_done < c.out.size() && !flush(c)) return false;
      if (c.state == State::kIdle && !c.in.empty()) continue;  // a pipelined request
      return true;
    }
    return true;
  }

  void accept_all(bool& accept_paused_until_set, Clock::time_point& accept_paused_until) {
    while (true) {
      sockaddr_in addr{};
      socklen_t len = sizeof addr;
      const int fd =
          ::accept4(listen_fd, reinterpret_cast<sockaddr*>(&addr), &len, SOCK_NONBLOCK | SOCK_CLOEXEC);
      if (fd < 0) {
        if (errno == EINTR || errno == ECONNABORTED) continue;
        if (errno == EMFILE || errno == ENFILE || errno == ENOBUFS || errno == ENOMEM) {
          accept_paused_until_set = true;  // out of descriptors: try again shortly
          accept_paused_until = Clock::now() + std::chrono::milliseconds(100);
        }
        return;
      }
      if (conns.size() >= options.max_connections) {
        ::close(fd);
        continue;
      }
      const int one = 1;
      ::setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
      Conn c;
      c.fd = fd;
      char ip[INET_ADDRSTRLEN] = {0};
      ::inet_ntop(AF_INET, &addr.sin_addr, ip, sizeof ip);
      c.remote = std::string(ip) + ":" + std::to_string(ntohs(addr.sin_port));
      c.deadline = Clock::now() + options.keep_alive_timeout;
      conns.emplace(next_id++, std::move(c));
    }
  }

  void take_done() {
    std::vector<Done> finished;
    {
      std::lock_guard<std::mutex> lock(done_mu);
      finished.swap(done);
    }
    for (auto& d : finished) {
      auto it = conns.find(d.conn);
      if (it == conns.end()) continue;
      Conn& c = it->second;
      answer(c, d.response);
      if (!pump(d.conn, c)) close_conn(d.conn);  // pump also starts a pipelined request
    }
  }

  // One connection's poll events: reads (or drains) what arrived and moves the request on, or
  // writes what is pending. False: close the connection.
  bool on_events(std::uint64_t id, Conn& c, short revents) {
    bool keep = true;
    if ((revents & (POLLIN | POLLHUP | POLLERR)) != 0 &&
        (c.state == State::kIdle || c.state == State::kHead || c.state == State::kBody)) {
      bool eof = false;
      char buf[16384];
      while (true) {
        const ssize_t n = ::recv(c.fd, buf, sizeof buf, 0);
        if (n > 0) {
          c.in.append(buf, static_cast<std::size_t>(n));
          if (c.in.size() > options.max_header_bytes + options.max_body_bytes + 65536) break;
          continue;
        }
        if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) break;
        if (n < 0 && errno == EINTR) continue;
        eof = true;  // closed by the peer (or an error)
        break;
      }
      keep = pump(id, c);
      if (keep && eof) {
        // A request read in full is still answered (the peer may only have shut down its
        // sending side); an unfinished one is dropped.
        if (c.state == State::kHandling || c.state == State::kWriting) {
          c.keep_alive = false;
          c.close_after_write = true;
        } else {
          keep = false;
        }
      }
    } else if (c.state == State::kDraining && (revents & (POLLIN | POLLHUP | POLLERR)) != 0) {
      char buf[16384];
      while (keep) {
        const ssize_t n = ::recv(c.fd, buf, sizeof buf, 0);
        if (n > 0) {
          c.drained += static_cast<std::size_t>(n);
          if (c.drained > (std::size_t{4} << 20)) keep = false;  // enough politeness
          continue;
        }
        if (n < 0 && (errno == EAGAIN || errno == EWOULDBLOCK)) break;
        if (n < 0 && errno == EINTR) continue;
        keep = false;
      }
    } else if ((revents & POLLERR) != 0) {
      keep = false;
    } else if ((revents & POLLOUT) != 0) {
      keep = pump(id, c);
    }
    return keep;
  }

  // Requests past their deadline get 408; idle connections past keep-alive are closed.
  void expire_deadlines() {
    const auto now = Clock::now();
    std::vector<std::uint64_t> expired;
    for (auto& [id, c] : conns) {
      if (c.state == State::kHandling || now < c.deadline) continue;
      if (c.state == State::kHead || c.state == State::kBody) {
        refuse(c, Refusal{408, "the request was not complete within " +
                                   std::to_string(options.request_timeout.count() / 1000) + " s"});
        if (!flush(c)) expired.push_back(id);
        if (c.state == State::kWriting) c.deadline = now + std::chrono::seconds(1);  // a last second
      } else {
        expired.push_back(id);  // idle past keep-alive, or not reading its answer
      }
    }
    for (auto id : expired) close_conn(id);
  }

  void loop() {
    bool accept_paused = false;
    Clock::time_point accept_paused_until;
    std::vector<pollfd> fds;
    std::vector<std::uint64_t> ids;
    bool listening = true;
    while (true) {
      const bool stop_now = stopping.load();
      if (stop_now && listening) {
        ::close(listen_fd);
        listen_fd = -1;
        listening = false;
      }
      if (stop_now) {
        // Idle and half-read connections go; those being handled or written are finished.
        std::vector<std::uint64_t> drop;
        for (auto& [id, c] : conns)
          if (c.state != State::kHandling && c.state != State::kWriting) drop.push_back(id);
        for (auto id : drop) close_conn(id);
        if (conns.empty()) return;
      }
      fds.clear();
      ids.clear();
      fds.push_back({wake_fd, POLLIN, 0});
      ids.push_back(0);
      if (listening) {
        if (accept_paused && Clock::now() >= accept_paused_until) accept_paused = false;
        if (!accept_paused) {
          fds.push_back({listen_fd, POLLIN, 0});
          ids.push_back(0);
        }
      }
      const std::size_t first_conn = fds.size();
      for (auto& [id, c] : conns) {
        short events = 0;
        if (c.state == State::kIdle || c.state == State::kHead || c.state == State::kBody ||
            c.state == State::kDraining)
          events |= POLLIN;
        if (c.out_done < c.out.size()) events |= POLLOUT;
        if (events == 0) continue;
        fds.push_back({c.fd, events, 0});
        ids.push_back(id);
      }
      const int r = ::poll(fds.data(), fds.size(), 100);
      if (r < 0 && errno != EINTR) return;
      if (r > 0 && (fds[0].revents & POLLIN) != 0) {
        std::uint64_t v = 0;
        [[maybe_unused]] const ssize_t n = ::read(wake_fd, &v, sizeof v);
      }
      take_done();
      if (r > 0) {
        if (listening && first_conn == 2 && (fds[1].revents & POLLIN) != 0)
          accept_all(accept_paused, accept_paused_until);
        for (std::size_t k = first_conn; k < fds.size(); ++k) {
          if (fds[k].revents == 0) continue;
          auto it = conns.find(ids[k]);
          if (it == conns.end()) continue;
          Conn& c = it->second;
          if (!on_events(ids[k], c, fds[k].revents)) close_conn(ids[k]);
        }
      }
      expire_deadlines();
    }
  }
};

Server::Server(ServerOptions options, Handlers handlers)
    : impl_(std::make_unique<Impl>(std::move(options), std::move(handlers))) {}

Server::~Server() = default;

Result<int> Server::bind(const std::string& host, int port) {
  const std::string where = host + ":" + std::to_string(port);
  in_addr addr{};
  const std::string ip = host == "localhost" ? "127.0.0.1" : host;
  if (::inet_pton(AF_INET, ip.c_str(), &addr) != 1)
    return io_error("cannot listen on " + where + ": not an IPv4 address");
  if (impl_->wake_fd < 0)
    return io_error("cannot listen on " + where + ": no event descriptor available");
  const int fd = ::socket(AF_INET, SOCK_STREAM | SOCK_NONBLOCK | SOCK_CLOEXEC, 0);
  if (fd < 0) return io_error("cannot listen on " + where + ": cannot create a socket");
  // SO_REUSEADDR only (restart over connections in TIME_WAIT). Not SO_REUSEPORT: with it a second
  // server could bind the same address and take half of the requests.
  const int one = 1;
  ::setsockopt(fd, SOL_SOCKET, SO_REUSEADDR, &one, sizeof one);
  sockaddr_in sa{};
  sa.sin_family = AF_INET;
  sa.sin_port = htons(static_cast<std::uint16_t>(port));
  sa.sin_addr = addr;
  if (::bind(fd, reinterpret_cast<sockaddr*>(&sa), sizeof sa) != 0) {
    const int e = errno;
    ::close(fd);
    if (e == EADDRINUSE)
      return busy("cannot listen on " + where + ": address in use (another process listens there)");
    if (e == EADDRNOTAVAIL) return io_error("cannot listen on " + where + ": not a local address");
    if (e == EACCES) return io_error("cannot listen on " + where + ": permission denied");
    return io_error("cannot listen on " + where + ": bind failed (errno " + std::to_string(e) + ")");
  }
  if (::listen(fd, 1024) != 0) {
    const int e = errno;
    ::close(fd);
    if (e == EADDRINUSE)
      return busy("cannot listen on " + where + ": address in use (another process listens there)");
    return io_error("cannot listen on " + where + ": listen failed (errno " + std::to_string(e) + ")");
  }
  socklen_t len = sizeof sa;
  ::getsockname(fd, reinterpret_cast<sockaddr*>(&sa), &len);
  if (impl_->listen_fd >= 0) ::close(impl_->listen_fd);
  impl_->listen_fd = fd;
  return static_cast<int>(ntohs(sa.sin_port));
}

void Server::run() {
  Impl& s = *impl_;
  if (s.listen_fd < 0 || s.stopping.load()) return;
  const std::size_t n = std::max<std::size_t>(1, s.options.threads);
  for (std::size_t k = 0; k < n; ++k) s.workers.emplace_back([&s] { s.worker(); });
  s.loop();
  {
    std::lock_guard<std::mutex> lock(s.jobs_mu);
    s.workers_quit = true;
  }
  s.jobs_cv.notify_all();
  for (auto& t : s.workers) t.join();
  s.workers.clear();
  for (auto& [id, c] : s.conns) ::close(c.fd);
  s.conns.clear();
}

void Server::stop() {
  impl_->stopping = true;
  impl_->wake();
}

}  // namespace alphaledger::http
