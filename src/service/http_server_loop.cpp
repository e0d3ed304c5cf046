// The server's event loop: one thread polls the listening socket and the connections, reads and
// checks requests, hands complete ones to the workers and writes their answers back
// (http_server_impl.hpp).
#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/socket.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstring>

#include "alphaledger/text.hpp"
#include "service/http_server_impl.hpp"

namespace alphaledger::http {

void Server::Impl::answer(Conn& c, const Response& r) {
  const bool close =
      r.close || !c.keep_alive || stopping.load() || c.served + 1 >= options.max_requests_per_connection;
  c.out += serialize(r, close);
  c.close_after_write = c.close_after_write || close;
  c.state = State::kWriting;
  c.deadline = Clock::now() + options.request_timeout;
  ++c.served;
}

void Server::Impl::refuse(Conn& c, const Refusal& r) {
  Response res = handlers.on_protocol_error ? handlers.on_protocol_error(r.status, r.what)
                                            : Response{r.status, r.what + "\n", {}, true};
  res.close = true;
  answer(c, res);
  if (handlers.on_done) handlers.on_done(c.req, res, ms_since(c.started));
}

void Server::Impl::advance(std::uint64_t id, Conn& c) {
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

void Server::Impl::worker() {
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

void Server::Impl::close_conn(std::uint64_t id) {
  auto it = conns.find(id);
  if (it == conns.end()) return;
  ::close(it->second.fd);
  conns.erase(it);
}

bool Server::Impl::flush(Conn& c) {
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

bool Server::Impl::pump(std::uint64_t id, Conn& c) {
  for (int round = 0; round < 64; ++round) {
    advance(id, c);
    if (c.out_done < c.out.size() && !flush(c)) return false;
    if (c.state == State::kIdle && !c.in.empty()) continue;  // a pipelined request
    return true;
  }
  return true;
}

void Server::Impl::accept_all(bool& accept_paused_until_set, Clock::time_point& accept_paused_until) {
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

void Server::Impl::take_done() {
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

bool Server::Impl::on_events(std::uint64_t id, Conn& c, short revents) {
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

void Server::Impl::expire_deadlines() {
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

void Server::Impl::loop() {
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

}  // namespace alphaledger::http
