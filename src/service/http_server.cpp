// The poll()-based HTTP/1.1 server of `serve` (see http_server.hpp).
#include "service/http_server.hpp"
#include "service/http_server_impl.hpp"

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

std::string Server::Impl::serialize(const Response& r, bool close) const {
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
