// Pieces of the PostgreSQL store shared by src/store/postgres_*.cpp: owning handles for libpq
// objects, SQL literals, the error translation and the readable copy of the ledger (the streams
// and decisions tables, docs/postgresql.md). Internal to the store.
//
// Thread-safety: free functions; a PGconn is used by one thread at a time (the store's pool hands
// each out to one caller).
#pragma once

#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <string_view>

#include "alphaledger/result.hpp"
#include "alphaledger/store.hpp"
#include "store/postgres_lib.hpp"

namespace alphaledger::store::pg {

// The schema version this build writes and reads (alphaledger.schema_version).
inline constexpr int kSchemaVersion = 1;

// SQLSTATE the store's own check function raises when a value moved (expect_value).
inline constexpr std::string_view kMovedState = "AL001";

struct ResultDeleter {
  void operator()(PGresult* r) const { pq().PQclear(r); }
};
using ResultPtr = std::unique_ptr<PGresult, ResultDeleter>;

// '\x<hex>'::bytea: any bytes as an SQL literal (only hex digits inside the quotes).
void append_bytea(std::string& sql, std::string_view bytes);
// convert_from('\x..'::bytea, 'UTF8'): text as an SQL literal, whatever its bytes.
void append_text(std::string& sql, std::string_view text);
// A double as an SQL literal that reads back to the same bits ('NaN', 'Infinity' included).
void append_float(std::string& sql, double v);
// A time in milliseconds since the Unix epoch as a timestamptz expression, exact to the millisecond.
void append_time(std::string& sql, std::int64_t ms);

// The error of a failed libpq call, `what` saying what was tried ("cannot read ledger URI").
// Connection failures (the server is away: SQLSTATE class 08, 57P, or no SQLSTATE at all) are
// kIOError saying to retry; a serialization failure, a deadlock, a unique violation or a moved
// value are kConflict head_moved; a read-only transaction or a missing privilege are kIOError
// naming the cause. `secret` (the password, when known) never appears in the text.
Error translate(PGconn* conn, const PGresult* result, const std::string& what, std::string_view secret);
// True when the error means the connection is no longer usable.
bool connection_lost(PGconn* conn, const PGresult* result);
// libpq's message with line breaks turned into "; " and `secret` replaced by ***.
std::string clean_message(std::string_view message, std::string_view secret);

// Adds to `sql` the statements that keep the streams and decisions tables in step with the
// entries that `batch` writes (decoded with the ledger's codec). Keys that are not a ledger's
// (or values that do not decode) have no row. `e_values(stream)` says whether a stream's rule
// takes e-values (its decisions row fills e_value rather than p_value); it may read the store.
using EValuesOf = std::function<Result<bool>(std::string_view stream)>;
Status append_projection(std::string& sql, const WriteBatch& batch, const EValuesOf& e_values);

// Checks the schema on `conn` (and creates it when absent and `may_create`): the not_found
// "no_ledger" error when absent and not to be made, corruption for an unknown version, else what
// translate() says (postgres_schema.cpp). `what` starts each message, `where` is the redacted URI.
Status prepare_schema(PGconn* conn, const std::string& what, const std::string& where, bool may_create,
                      std::string_view secret);

// The first row of stream's projection that differs from its entries, read in one snapshot on
// `conn` (postgres_projection.cpp).
Result<std::optional<Store::ProjectionProblem>> check_projection(PGconn* conn, std::string_view stream,
                                                                 const std::string& where,
                                                                 std::string_view secret);

}  // namespace alphaledger::store::pg
