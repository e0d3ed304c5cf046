// Reading HTTP/1.1 requests out of a connection's bytes (service/http_request_parser.hpp).
#include "service/http_request_parser.hpp"

#include <algorithm>
#include <cstring>
#include <vector>

namespace alphaledger::http {
namespace {

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

bool is_token_char(char c) {
  const auto u = static_cast<unsigned char>(c);
  if (u <= 0x20 || u >= 0x7f) return false;
  return std::strchr("\"(),/:;<=>?@[\\]{}", c) == nullptr;
}

// Digits only, at most 18 of them (so no overflow); nullopt otherwise.
std::optional<std::size_t> parse_decimal(std::string_view s) {
  if (s.empty() || s.size() > 18) return std::nullopt;
  std::size_t v = 0;
  for (char c : s) {
    if (c < '0' || c > '9') return std::nullopt;
    v = v * 10 + static_cast<std::size_t>(c - '0');
  }
  return v;
}

std::optional<std::size_t> parse_hex(std::string_view s) {
  if (s.empty() || s.size() > 15) return std::nullopt;
  std::size_t v = 0;
  for (char c : s) {
    const int d = hex_digit(c);
    if (d < 0) return std::nullopt;
    v = v * 16 + static_cast<std::size_t>(d);
  }
  return v;
}

}  // namespace

std::optional<Refusal> RequestParser::parse_head(Conn& c, bool& complete) const {
  complete = false;
  // Find the empty line that ends the head (CRLF or bare LF line ends).
  std::size_t end = std::string::npos, body_start = 0;
  for (std::size_t pos = 0; pos < c.in.size();) {
    const std::size_t nl = c.in.find('\n', pos);
    if (nl == std::string::npos) break;
    const std::size_t len = nl - pos;
    if (len == 0 || (len == 1 && c.in[pos] == '\r')) {
      end = pos;
      body_start = nl + 1;
      break;
    }
    pos = nl + 1;
  }
  if (end == std::string::npos) {
    if (c.in.size() > options_.max_header_bytes)
      return Refusal{431, "the request line and headers are larger than " +
                              std::to_string(options_.max_header_bytes) + " bytes"};
    return std::nullopt;
  }
  if (end > options_.max_header_bytes)
    return Refusal{431, "the request line and headers are larger than " +
                            std::to_string(options_.max_header_bytes) + " bytes"};
  complete = true;
  const std::string head = c.in.substr(0, end);
  c.in.erase(0, body_start);

  std::vector<std::string_view> lines;
  std::string_view rest(head);
  while (!rest.empty()) {
    const std::size_t nl = rest.find('\n');
    std::string_view line = rest.substr(0, nl);
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    lines.push_back(line);
    if (nl == std::string_view::npos) break;
    rest.remove_prefix(nl + 1);
  }
  const Refusal malformed{400, "malformed HTTP request"};
  if (lines.empty()) return malformed;
  // Request line: METHOD SP TARGET SP HTTP/1.x
  const std::string_view rl = lines[0];
  const std::size_t s1 = rl.find(' ');
  const std::size_t s2 = s1 == std::string_view::npos ? s1 : rl.find(' ', s1 + 1);
  if (s1 == std::string_view::npos || s2 == std::string_view::npos) return malformed;
  const std::string_view method = rl.substr(0, s1), target = rl.substr(s1 + 1, s2 - s1 - 1),
                         version = rl.substr(s2 + 1);
  if (method.empty() || !std::all_of(method.begin(), method.end(), is_token_char)) return malformed;
  if (target.empty() || target[0] != '/') return malformed;
  for (char ch : target)
    if (static_cast<unsigned char>(ch) <= 0x20 || static_cast<unsigned char>(ch) >= 0x7f) return malformed;
  if (version == "HTTP/1.1") {
    c.req.minor_version = 1;
  } else if (version == "HTTP/1.0") {
    c.req.minor_version = 0;
  } else {
    return Refusal{400, "malformed HTTP request (only HTTP/1.0 and HTTP/1.1 are served)"};
  }
  c.req.method = std::string(method);
  c.req.target = std::string(target);
  const std::size_t q = target.find('?');
  c.req.path = std::string(target.substr(0, q));
  c.req.query = q == std::string_view::npos ? std::string() : std::string(target.substr(q + 1));
  if (lines.size() - 1 > options_.max_headers)
    return Refusal{431, "more than " + std::to_string(options_.max_headers) + " header lines"};
  for (std::size_t k = 1; k < lines.size(); ++k) {
    const std::string_view line = lines[k];
    const std::size_t colon = line.find(':');
    if (colon == std::string_view::npos || colon == 0) return malformed;
    const std::string_view name = line.substr(0, colon);
    if (!std::all_of(name.begin(), name.end(), is_token_char)) return malformed;
    c.req.headers.emplace_back(lower(name), std::string(trim(line.substr(colon + 1))));
  }
  return std::nullopt;
}

// Decides how the body is framed, after the head. Refusal on contradictory or bad framing.
std::optional<Refusal> RequestParser::framing(Conn& c) const {
  const Request& r = c.req;
  const std::string* connection = r.header("connection");
  const std::string conn_value = connection ? lower(*connection) : std::string();
  c.keep_alive = r.minor_version == 1 ? conn_value.find("close") == std::string::npos
                                      : conn_value.find("keep-alive") != std::string::npos;
  std::optional<std::size_t> length;
  bool te = false;
  for (const auto& [k, v] : r.headers) {
    if (k == "content-length") {
      auto n = parse_decimal(v);
      if (!n) return Refusal{400, "Content-Length must be a decimal number of bytes"};
      if (length && *length != *n) return Refusal{400, "two different Content-Length headers"};
      length = n;
    } else if (k == "transfer-encoding") {
      if (te || lower(v) != "chunked")
        return Refusal{400, "the only Transfer-Encoding accepted is 'chunked'"};
      te = true;
    }
  }
  if (te && length) return Refusal{400, "Content-Length and Transfer-Encoding together"};
  c.chunked = te;
  c.content_length = length.value_or(0);
  c.chunk = Conn::Chunk::kSize;
  c.chunk_left = 0;
  c.trailer_bytes = 0;
  return std::nullopt;
}

Refusal RequestParser::too_large() const {
  return Refusal{413,
                 "the request body is larger than " + std::to_string(options_.max_body_bytes) + " bytes"};
}

// Consumes body bytes from c.in. Sets complete when the whole body is in c.req.body.
std::optional<Refusal> RequestParser::read_body(Conn& c, bool& complete) const {
  complete = false;
  if (!c.chunked) {
    if (c.in.size() < c.content_length) return std::nullopt;
    c.req.body = c.in.substr(0, c.content_length);
    c.in.erase(0, c.content_length);
    complete = true;
    return std::nullopt;
  }
  std::size_t pos = 0;
  const Refusal bad{400, "malformed chunked body"};
  while (true) {
    if (c.chunk == Conn::Chunk::kData) {
      const std::size_t take = std::min(c.chunk_left, c.in.size() - pos);
      c.req.body.append(c.in, pos, take);
      pos += take;
      c.chunk_left -= take;
      if (c.chunk_left > 0) break;
      c.chunk = Conn::Chunk::kDataEnd;
      continue;
    }
    const std::size_t nl = c.in.find('\n', pos);
    if (nl == std::string::npos) {
      if (c.in.size() - pos > 1024) return bad;  // a size or trailer line this long is not sane
      break;
    }
    std::string_view line(c.in.data() + pos, nl - pos);
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    pos = nl + 1;
    if (c.chunk == Conn::Chunk::kDataEnd) {
      if (!line.empty()) return bad;
      c.chunk = Conn::Chunk::kSize;
    } else if (c.chunk == Conn::Chunk::kSize) {
      const std::string_view size = trim(line.substr(0, line.find(';')));
      auto n = parse_hex(size);
      if (!n) return bad;
      if (*n == 0) {
        c.chunk = Conn::Chunk::kTrailer;
      } else {
        if (*n > options_.max_body_bytes || c.req.body.size() + *n > options_.max_body_bytes)
          return too_large();
        c.chunk_left = *n;
        c.chunk = Conn::Chunk::kData;
      }
    } else {  // trailer lines until an empty one
      c.trailer_bytes += line.size();
      if (c.trailer_bytes > options_.max_header_bytes)
        return Refusal{431, "the chunked trailer is larger than " +
                                std::to_string(options_.max_header_bytes) + " bytes"};
      if (line.empty()) {
        c.in.erase(0, pos);
        complete = true;
        return std::nullopt;
      }
    }
  }
  c.in.erase(0, pos);
  return std::nullopt;
}

// Moves the connection forward with the bytes in c.in: head, body, then hands the request on.
}  // namespace alphaledger::http
