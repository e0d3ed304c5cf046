// The schema of the PostgreSQL store (docs/postgresql.md "Schema (version 1)"): made on first use,
// and its version checked on every open (postgres_internal.hpp).
#include <string>

#include "alphaledger/text.hpp"
#include "store/postgres_internal.hpp"

namespace alphaledger::store::pg {

namespace {

// The schema, made in one transaction under an advisory lock (its key is a fixed number of our
// own), so that two processes creating it at once take turns.
constexpr const char* kCreateSchema = R"sql(
BEGIN;
SELECT pg_advisory_xact_lock(7022652150046074228);
CREATE SCHEMA IF NOT EXISTS alphaledger;
CREATE TABLE IF NOT EXISTS alphaledger.schema_version (version integer NOT NULL);
CREATE TABLE IF NOT EXISTS alphaledger.entries (key bytea PRIMARY KEY, value bytea NOT NULL);
CREATE TABLE IF NOT EXISTS alphaledger.streams (
  stream text PRIMARY KEY,
  rule text NOT NULL,
  alpha float8 NOT NULL,
  alternative text NOT NULL,
  created_at timestamptz NOT NULL,
  record_count bigint NOT NULL,
  closed_at timestamptz);
CREATE TABLE IF NOT EXISTS alphaledger.decisions (
  stream text NOT NULL,
  step bigint NOT NULL,
  id text NOT NULL,
  kind text NOT NULL,
  launch bigint NOT NULL,
  p_value float8,
  e_value float8,
  level float8 NOT NULL,
  rejected boolean,
  wealth float8 NOT NULL,
  decided_at timestamptz NOT NULL,
  hash bytea NOT NULL,
  PRIMARY KEY (stream, step));
CREATE OR REPLACE FUNCTION alphaledger.expect_value(k bytea, expected bytea) RETURNS void
LANGUAGE plpgsql AS $body$
BEGIN
  PERFORM 1 FROM alphaledger.entries WHERE key = k AND value = expected FOR UPDATE;
  IF NOT FOUND THEN
    RAISE EXCEPTION 'the value at the key moved' USING ERRCODE = 'AL001';
  END IF;
END
$body$;
INSERT INTO alphaledger.schema_version (version)
  SELECT 1 WHERE NOT EXISTS (SELECT 1 FROM alphaledger.schema_version);
COMMIT;
)sql";

}  // namespace

Status prepare_schema(PGconn* conn, const std::string& what, const std::string& where, bool may_create,
                      std::string_view secret) {
  ResultPtr found(pq().PQexec(conn, "SELECT to_regclass('alphaledger.schema_version') IS NOT NULL"));
  if (pq().PQresultStatus(found.get()) != PGRES_TUPLES_OK) return translate(conn, found.get(), what, secret);
  const bool exists = std::string_view(pq().PQgetvalue(found.get(), 0, 0)) == "t";
  if (!exists) {
    if (!may_create) {
      return not_found(
          "no ledger at " + where + " (the database has no alphaledger schema; `new` creates it)",
          "no_ledger");
    }
    ResultPtr made(pq().PQexec(conn, kCreateSchema));
    if (pq().PQresultStatus(made.get()) != PGRES_COMMAND_OK)
      return translate(conn, made.get(), what + ": cannot create the alphaledger schema", secret);
  }
  ResultPtr version(pq().PQexec(conn, "SELECT version FROM alphaledger.schema_version"));
  if (pq().PQresultStatus(version.get()) != PGRES_TUPLES_OK) return translate(conn, version.get(), what, secret);
  if (pq().PQntuples(version.get()) != 1) {
    return corruption(what + ": alphaledger.schema_version holds " +
                      std::to_string(pq().PQntuples(version.get())) +
                      " rows, not 1: the schema is damaged or was not made by alphaledger");
  }
  const std::string v = pq().PQgetvalue(version.get(), 0, 0);
  if (v != std::to_string(kSchemaVersion)) {
    return corruption(what + ": its schema has version " + excerpt(v, 20) +
                      ", which this build of alphaledger " + "does not know (it reads version " +
                      std::to_string(kSchemaVersion) + "); use the alphaledger that made it, or a newer one");
  }
  return {};
}

}  // namespace alphaledger::store::pg
