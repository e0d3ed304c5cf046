// SQL literals, error translation and ledger locations for the PostgreSQL store
// (postgres_internal.hpp, include/alphaledger/store.hpp).
#include <charconv>
#include <cmath>
#include <string>

#include "alphaledger/store.hpp"
#include "store/postgres_internal.hpp"

namespace alphaledger {

bool is_postgres_uri(std::string_view location) {
  return location.starts_with("postgresql://") || location.starts_with("postgres://");
}

std::string redact_uri(std::string_view uri) {
  std::string out(uri);
  const auto scheme = out.find("://");
  if (scheme == std::string::npos) return out;
  const std::size_t start = scheme + 3;
  // The user information ends at the last '@' before the query: a password may hold '/' or '?'
  // only percent-encoded, but a hand-written one might not be, so the last '@' is the safe bound.
  const std::size_t query = out.find('?', start);
  const std::size_t at = out.rfind('@', query == std::string::npos ? std::string::npos : query);
  if (at != std::string::npos && at >= start) {
    const std::size_t colon = out.find(':', start);
    if (colon != std::string::npos && colon < at) out.replace(colon + 1, at - colon - 1, "***");
  }
  // password=... among the query parameters (anywhere after '?', separated by '&').
  std::size_t q = out.find('?', start);
  while (q != std::string::npos && q < out.size()) {
    const std::size_t name = q + 1;
    const std::size_t end = out.find('&', name);
    const std::size_t stop = end == std::string::npos ? out.size() : end;
    const std::string_view param(out.data() + name, stop - name);
    if (param.starts_with("password=")) {
      const std::size_t value = name + 9;
      out.replace(value, stop - value, "***");
    }
    q = out.find('&', name);
  }
  return out;
}

namespace store::pg {

namespace {

constexpr char kHexDigits[] = "0123456789abcdef";

}  // namespace

void append_bytea(std::string& sql, std::string_view bytes) {
  sql += "'\\x";
  for (unsigned char c : bytes) {
    sql.push_back(kHexDigits[c >> 4]);
    sql.push_back(kHexDigits[c & 15]);
  }
  sql += "'::bytea";
}

void append_text(std::string& sql, std::string_view text) {
  sql += "convert_from(";
  append_bytea(sql, text);
  sql += ", 'UTF8')";
}

void append_float(std::string& sql, double v) {
  if (std::isnan(v)) {
    sql += "'NaN'::float8";
    return;
  }
  if (std::isinf(v)) {
    sql += v > 0 ? "'Infinity'::float8" : "'-Infinity'::float8";
    return;
  }
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v);  // shortest text that reads back exactly
  sql += "'";
  sql.append(buf, ec == std::errc() ? ptr : buf);
  sql += "'::float8";
}

void append_time(std::string& sql, std::int64_t ms) {
  sql += "(timestamptz 'epoch' + ";
  sql += std::to_string(ms);
  sql += " * interval '1 millisecond')";
}

std::string clean_message(std::string_view message, std::string_view secret) {
  std::string out;
  out.reserve(message.size());
  for (char c : message) {
    if (c == '\r' || c == '\t') continue;
    if (c == '\n') {
      out += "; ";
    } else {
      out.push_back(c);
    }
  }
  while (out.ends_with("; ") || out.ends_with(' ')) out.resize(out.size() - (out.ends_with("; ") ? 2 : 1));
  if (!secret.empty()) {
    for (std::size_t at = out.find(secret); at != std::string::npos; at = out.find(secret, at + 3)) {
      out.replace(at, secret.size(), "***");
    }
  }
  return out;
}

bool connection_lost(PGconn* conn, const PGresult* result) {
  if (conn == nullptr || pq().PQstatus(conn) == CONNECTION_BAD) return true;
  const char* state = result ? pq().PQresultErrorField(result, PG_DIAG_SQLSTATE) : nullptr;
  if (state == nullptr) return true;  // libpq's own failure: nothing came back from the server
  const std::string_view s(state);
  return s.starts_with("08") || s.starts_with("57P");
}

Error translate(PGconn* conn, const PGresult* result, const std::string& what, std::string_view secret) {
  const char* raw = result ? pq().PQresultErrorMessage(result) : nullptr;
  if (raw == nullptr || *raw == '\0') raw = conn ? pq().PQerrorMessage(conn) : "no connection";
  const std::string message = clean_message(raw, secret);
  if (connection_lost(conn, result)) {
    return io_error(what + ": the PostgreSQL server is not reachable (" + message +
                    "); nothing was changed unless the server had committed it: retry when it is back");
  }
  const std::string_view state(pq().PQresultErrorField(result, PG_DIAG_SQLSTATE));
  if (state == kMovedState || state == "40001" || state == "40P01" || state == "23505") {
    Error e = head_moved("the stream's head");
    e.message =
        what + ": another writer changed the stream at the same time (" + message + "); read again and redo";
    return e;
  }
  if (state == "25006") {
    return io_error(what +
                    ": the ledger was opened for reading only, or the server is a read-only standby (" +
                    message + ")");
  }
  if (state == "42501") {
    return io_error(what + ": the PostgreSQL user is not allowed to do this (" + message +
                    "); grant it the rights docs/postgresql.md lists");
  }
  if (state.starts_with("53")) {
    return io_error(what + ": the PostgreSQL server is out of resources (" + message + "); retry later");
  }
  return io_error(what + ": " + message + " (SQLSTATE " + std::string(state) + ")");
}

}  // namespace store::pg
}  // namespace alphaledger
