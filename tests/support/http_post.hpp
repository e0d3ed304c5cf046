// A minimal HTTP/1.1 client for tests that drive `serve` from binaries without cpp-httplib: one
// POST per connection, the answer read by its Content-Length. Any failure (refused, reset, timed
// out, not HTTP) is status 0, which the caller treats as "no answer".
#pragma once

#include <arpa/inet.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <sys/socket.h>
#include <sys/time.h>
#include <unistd.h>

#include <cctype>
#include <cstdint>
#include <cstdlib>
#include <string>

#include "support/text.hpp"

namespace alphaledger::test_support {

struct HttpReply {
  int status = 0;  // 0: no complete answer
  std::string body;
};

inline HttpReply http_post(int port, const std::string& path, const std::string& body,
                           const std::string& bearer_token = {}, int timeout_s = 15) {
  HttpReply reply;
  const int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  if (fd < 0) return reply;
  timeval tv{timeout_s, 0};
  ::setsockopt(fd, SOL_SOCKET, SO_RCVTIMEO, &tv, sizeof tv);
  ::setsockopt(fd, SOL_SOCKET, SO_SNDTIMEO, &tv, sizeof tv);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  a.sin_port = htons(static_cast<std::uint16_t>(port));
  auto done = [&] {
    ::close(fd);
    return reply;
  };
  if (::connect(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) != 0) return done();
  std::string request = concat("POST ", path, " HTTP/1.1\r\nHost: 127.0.0.1\r\nConnection: close\r\n");
  if (!bearer_token.empty()) request += concat("Authorization: Bearer ", bearer_token, "\r\n");
  request += concat("Content-Type: application/json\r\nContent-Length: ", std::to_string(body.size()),
                    "\r\n\r\n", body);
  for (std::size_t sent = 0; sent < request.size();) {
    const ssize_t n = ::send(fd, request.data() + sent, request.size() - sent, MSG_NOSIGNAL);
    if (n <= 0) return done();
    sent += static_cast<std::size_t>(n);
  }
  std::string in;
  std::size_t header_end = std::string::npos, want = 0;
  char buf[8192];
  while (true) {
    if (header_end == std::string::npos) {
      header_end = in.find("\r\n\r\n");
      if (header_end != std::string::npos) {
        std::string lower = in.substr(0, header_end);
        for (auto& ch : lower) ch = static_cast<char>(std::tolower(static_cast<unsigned char>(ch)));
        const auto cl = lower.find("\r\ncontent-length:");
        want = cl == std::string::npos ? 0 : std::strtoull(lower.c_str() + cl + 17, nullptr, 10);
      }
    }
    if (header_end != std::string::npos && in.size() >= header_end + 4 + want) break;
    const ssize_t n = ::recv(fd, buf, sizeof buf, 0);
    if (n <= 0) return done();  // closed or timed out before the whole answer
    in.append(buf, static_cast<std::size_t>(n));
  }
  if (!in.starts_with("HTTP/1.") || in.size() < 12) return done();
  reply.status = std::atoi(in.c_str() + 9);
  reply.body = in.substr(header_end + 4, want);
  return done();
}

}  // namespace alphaledger::test_support
