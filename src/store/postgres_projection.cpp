// The readable copy of a PostgreSQL ledger: the rows of alphaledger.streams and
// alphaledger.decisions that each batch's entries decode to (written in the batch's transaction),
// and the check that every row still equals them (verify). docs/postgresql.md lists the columns.
#include <bit>
#include <charconv>
#include <cstring>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "alphaledger/stats.hpp"
#include "alphaledger/text.hpp"
#include "store/codec.hpp"
#include "store/ledger_internal.hpp"
#include "store/postgres_internal.hpp"

namespace alphaledger::store::pg {

namespace {

// One decisions row: a chain entry as columns.
struct DecisionRow {
  std::uint64_t step = 0;
  std::string id;
  std::string kind;  // decision, launch, finish, abandon, look
  std::uint64_t launch = 0;
  std::optional<double> p_value;  // a decision's or finish's p-value (streams that take p-values)
  std::optional<double> e_value;  // the same for streams that take e-values (e-lond)
  double level = 0;
  std::optional<bool> rejected;  // decision and finish only
  double wealth = 0;
  std::int64_t decided_at_ms = 0;  // the entry's time
  std::string hash;                // the entry's SHA-256, 32 bytes
};

DecisionRow row_of(const ChainEntry& e, bool e_values) {
  DecisionRow row;
  std::optional<double> number;
  if (!e.is_event) {
    const DecisionRecord& r = e.record.record;
    row.step = r.step;
    row.id = r.id;
    row.kind = "decision";
    row.launch = r.step;
    number = r.p_value;
    row.level = r.level;
    row.rejected = r.rejected;
    row.wealth = r.wealth;
    row.decided_at_ms = r.decided_at_ms;
  } else {
    const EventRecord& ev = e.event.event;
    row.step = ev.entry;
    row.id = ev.id;
    row.kind = std::string(event_kind_name(ev.kind));
    row.launch = ev.launch;
    if (ev.kind == EventKind::kFinish) {
      number = ev.p_value;
      row.rejected = ev.rejected;
    }
    row.level = ev.level;
    row.wealth = ev.wealth;
    row.decided_at_ms = ev.at_ms;
  }
  (e_values ? row.e_value : row.p_value) = number;
  const Digest& h = e.hash();
  row.hash.assign(reinterpret_cast<const char*>(h.data()), h.size());
  return row;
}

struct StreamRow {
  std::string rule;
  double alpha = 0;
  std::string alternative;
  std::int64_t created_at_ms = 0;
  std::uint64_t record_count = 0;
  std::optional<std::int64_t> closed_at_ms;
};

// The stream named by a key of `prefix` ("c/", "h/": the rest; "r/": up to the last '/'), if valid.
std::optional<std::string_view> stream_of(std::string_view key, std::string_view prefix) {
  if (!key.starts_with(prefix)) return std::nullopt;
  std::string_view rest = key.substr(prefix.size());
  if (prefix == "r/") {
    const auto slash = rest.rfind('/');
    if (slash == std::string_view::npos) return std::nullopt;
    rest = rest.substr(0, slash);
  }
  if (!validate_stream_name(rest)) return std::nullopt;
  return rest;
}

void append_optional_float(std::string& sql, const std::optional<double>& v) {
  if (v) {
    append_float(sql, *v);
  } else {
    sql += "NULL";
  }
}

void append_decision(std::string& sql, std::string_view stream, const DecisionRow& row) {
  sql +=
      "INSERT INTO alphaledger.decisions (stream, step, id, kind, launch, p_value, e_value, level, rejected, "
      "wealth, decided_at, hash) VALUES (";
  append_text(sql, stream);
  sql += ", " + std::to_string(row.step) + ", ";
  append_text(sql, row.id);
  sql += ", '" + row.kind + "', " + std::to_string(row.launch) + ", ";
  append_optional_float(sql, row.p_value);
  sql += ", ";
  append_optional_float(sql, row.e_value);
  sql += ", ";
  append_float(sql, row.level);
  sql += row.rejected ? (*row.rejected ? ", true, " : ", false, ") : ", NULL, ";
  append_float(sql, row.wealth);
  sql += ", ";
  append_time(sql, row.decided_at_ms);
  sql += ", ";
  append_bytea(sql, row.hash);
  sql +=
      ") ON CONFLICT (stream, step) DO UPDATE SET id = EXCLUDED.id, kind = EXCLUDED.kind, "
      "launch = EXCLUDED.launch, p_value = EXCLUDED.p_value, e_value = EXCLUDED.e_value, "
      "level = EXCLUDED.level, rejected = EXCLUDED.rejected, wealth = EXCLUDED.wealth, "
      "decided_at = EXCLUDED.decided_at, hash = EXCLUDED.hash;\n";
}

}  // namespace

Status append_projection(std::string& sql, const WriteBatch& batch, const EValuesOf& e_values) {
  // Configurations first: a stream's row exists before its head updates it.
  for (const auto& op : batch.ops) {
    auto stream = stream_of(op.key, "c/");
    if (!stream) continue;
    if (op.erase) {
      sql += "DELETE FROM alphaledger.streams WHERE stream = ";
      append_text(sql, *stream);
      sql += ";\n";
      continue;
    }
    auto config = decode_config(op.value);
    if (!config) continue;
    sql +=
        "INSERT INTO alphaledger.streams (stream, rule, alpha, alternative, created_at, record_count, "
        "closed_at) VALUES (";
    append_text(sql, *stream);
    sql += ", '" + std::string(rule_name(config->config.kind)) + "', ";
    append_float(sql, config->config.alpha);
    sql += ", '" + std::string(alternative_name(config->alternative)) + "', ";
    append_time(sql, config->created_at_ms);
    sql +=
        ", 0, NULL) ON CONFLICT (stream) DO UPDATE SET rule = EXCLUDED.rule, alpha = EXCLUDED.alpha, "
        "alternative = EXCLUDED.alternative, created_at = EXCLUDED.created_at;\n";
    // Records may be written before their configuration (`copy` writes it last, with the head):
    // they went in as p-values, as a stream without a configuration is read as one. Move them.
    if (rule_takes_e_values(config->config.kind)) {
      sql += "UPDATE alphaledger.decisions SET e_value = p_value, p_value = NULL WHERE stream = ";
      append_text(sql, *stream);
      sql += " AND e_value IS NULL AND p_value IS NOT NULL;\n";
    }
  }
  for (const auto& op : batch.ops) {
    if (auto stream = stream_of(op.key, "r/")) {
      if (op.erase) {
        // The step is the key's last 16 hex digits.
        const std::string_view hex = std::string_view(op.key).substr(op.key.rfind('/') + 1);
        std::uint64_t step = 0;
        if (hex.size() != 16 ||
            std::from_chars(hex.data(), hex.data() + hex.size(), step, 16).ec != std::errc())
          continue;
        sql += "DELETE FROM alphaledger.decisions WHERE stream = ";
        append_text(sql, *stream);
        sql += " AND step = " + std::to_string(step) + ";\n";
        continue;
      }
      auto entry = decode_entry(op.value);
      if (!entry) continue;
      auto e = e_values(*stream);
      if (!e) return e.error();
      append_decision(sql, *stream, row_of(*entry, *e));
    } else if (auto head_of = stream_of(op.key, "h/"); head_of && !op.erase) {
      auto head = decode_head(op.value);
      if (!head) continue;
      sql +=
          "UPDATE alphaledger.streams SET record_count = " + std::to_string(head->steps) + ", closed_at = ";
      if (head->closed_at_ms) {
        append_time(sql, *head->closed_at_ms);
      } else {
        sql += "NULL";
      }
      sql += " WHERE stream = ";
      append_text(sql, *head_of);
      sql += ";\n";
    }
  }
  return {};
}

namespace {

// Binary result fields (network byte order).
std::uint64_t be64(const char* p) {
  std::uint64_t v = 0;
  for (int i = 0; i < 8; ++i) v = (v << 8) | static_cast<unsigned char>(p[i]);
  return v;
}

class Fields {
 public:
  Fields(const PGresult* r, int row) : r_(r), row_(row) {}
  bool null(int col) const { return pq().PQgetisnull(r_, row_, col) != 0; }
  std::string_view bytes(int col) const {
    return {pq().PQgetvalue(r_, row_, col), static_cast<std::size_t>(pq().PQgetlength(r_, row_, col))};
  }
  std::int64_t int64(int col) const { return static_cast<std::int64_t>(be64(pq().PQgetvalue(r_, row_, col))); }
  double float8(int col) const { return std::bit_cast<double>(be64(pq().PQgetvalue(r_, row_, col))); }
  bool boolean(int col) const { return pq().PQgetvalue(r_, row_, col)[0] != 0; }
  std::optional<double> opt_float8(int col) const {
    return null(col) ? std::nullopt : std::optional(float8(col));
  }

 private:
  const PGresult* r_;
  int row_;
};

std::string shown(const std::optional<double>& v) { return v ? readable_number(*v) : "NULL"; }
std::string shown(const std::optional<bool>& v) { return v ? (*v ? "true" : "false") : "NULL"; }
std::string shown_time(const std::optional<std::int64_t>& ms) { return ms ? format_timestamp(*ms) : "NULL"; }

bool same(const std::optional<double>& a, const std::optional<double>& b) {
  return a.has_value() == b.has_value() && (!a || same_bits(*a, *b));
}

// The first column where `stored` differs from `expected`, as "column C is X, the entry says Y".
std::optional<std::string> first_difference(const DecisionRow& stored, const DecisionRow& expected) {
  const auto differs = [](std::string_view column, const std::string& is, const std::string& says) {
    return "column " + std::string(column) + " is " + is + ", the ledger entry says " + says;
  };
  if (stored.id != expected.id)
    return differs("id", in_quotes(excerpt(stored.id)), in_quotes(excerpt(expected.id)));
  if (stored.kind != expected.kind) return differs("kind", excerpt(stored.kind), expected.kind);
  if (stored.launch != expected.launch)
    return differs("launch", std::to_string(stored.launch), std::to_string(expected.launch));
  if (!same(stored.p_value, expected.p_value))
    return differs("p_value", shown(stored.p_value), shown(expected.p_value));
  if (!same(stored.e_value, expected.e_value))
    return differs("e_value", shown(stored.e_value), shown(expected.e_value));
  if (!same_bits(stored.level, expected.level))
    return differs("level", readable_number(stored.level), readable_number(expected.level));
  if (stored.rejected != expected.rejected)
    return differs("rejected", shown(stored.rejected), shown(expected.rejected));
  if (!same_bits(stored.wealth, expected.wealth))
    return differs("wealth", readable_number(stored.wealth), readable_number(expected.wealth));
  if (stored.decided_at_ms != expected.decided_at_ms)
    return differs("decided_at", format_timestamp(stored.decided_at_ms),
                   format_timestamp(expected.decided_at_ms));
  if (stored.hash != expected.hash) return differs("hash", "another value", "the entry's own hash");
  return std::nullopt;
}

ResultPtr run(PGconn* conn, const char* sql, const std::string& param, const std::string& param2 = {},
              int nparams = 1) {
  const char* values[] = {param.data(), param2.data()};
  const int lengths[] = {static_cast<int>(param.size()), static_cast<int>(param2.size())};
  const int formats[] = {1, 1};
  return ResultPtr(pq().PQexecParams(conn, sql, nparams, nullptr, values, lengths, formats, 1));
}

}  // namespace

namespace {

using Problem = Store::ProjectionProblem;

// What check_projection reads, in one read-only snapshot: the stream's record entries, its
// decisions rows, its configuration and head entries, and its streams row.
struct ProjectionSnapshot {
  ResultPtr entries, rows, config, head, stream_row;
};

Result<ProjectionSnapshot> read_snapshot(PGconn* conn, std::string_view stream,
                                         const std::function<Error(const PGresult*)>& fail) {
  const std::string name(stream);
  ResultPtr begin(pq().PQexec(conn, "BEGIN ISOLATION LEVEL REPEATABLE READ READ ONLY"));
  if (pq().PQresultStatus(begin.get()) != PGRES_COMMAND_OK) return fail(begin.get());
  const std::string lo = record_prefix(stream);
  std::string hi = lo;
  hi.back() = static_cast<char>('/' + 1);
  ProjectionSnapshot snap;
  snap.entries = run(
      conn, "SELECT value FROM alphaledger.entries WHERE key >= $1::bytea AND key < $2::bytea ORDER BY key",
      lo, hi, 2);
  snap.rows = run(conn,
                  "SELECT step, id, kind, launch, p_value, e_value, level, rejected, wealth, "
                  "(extract(epoch FROM decided_at) * 1000)::bigint, hash FROM alphaledger.decisions "
                  "WHERE stream = $1::text ORDER BY step",
                  name);
  snap.config = run(conn, "SELECT value FROM alphaledger.entries WHERE key = $1::bytea", config_key(stream));
  snap.head = run(conn, "SELECT value FROM alphaledger.entries WHERE key = $1::bytea", head_key(stream));
  snap.stream_row = run(conn,
                        "SELECT rule, alpha, alternative, (extract(epoch FROM created_at) * 1000)::bigint, "
                        "record_count, (extract(epoch FROM closed_at) * 1000)::bigint FROM "
                        "alphaledger.streams WHERE stream = $1::text",
                        name);
  for (const ResultPtr* r : {&snap.entries, &snap.rows, &snap.config, &snap.head, &snap.stream_row}) {
    if (pq().PQresultStatus(r->get()) != PGRES_TUPLES_OK) return fail(r->get());
  }
  ResultPtr end(pq().PQexec(conn, "COMMIT"));
  return snap;
}

// The streams row against the configuration and head entries.
std::optional<Problem> check_stream_row(const PGresult* stream_row, std::string_view stream,
                                        const StoredConfig& cfg, const StoredHead& hd) {
  const std::string table_row = "alphaledger.streams row of stream " + in_quotes(stream);
  if (pq().PQntuples(stream_row) != 1) return Problem{0, table_row + " is missing"};
  const Fields f(stream_row, 0);
  StreamRow expected{std::string(rule_name(cfg.config.kind)),
                     cfg.config.alpha,
                     std::string(alternative_name(cfg.alternative)),
                     cfg.created_at_ms,
                     hd.steps,
                     hd.closed_at_ms};
  const auto differs = [&](std::string_view column, const std::string& is, const std::string& says) {
    return std::optional<Problem>{Problem{
        0, table_row + ": column " + std::string(column) + " is " + is + ", the ledger entries say " + says}};
  };
  if (f.bytes(0) != expected.rule) return differs("rule", excerpt(f.bytes(0)), expected.rule);
  if (!same_bits(f.float8(1), expected.alpha))
    return differs("alpha", readable_number(f.float8(1)), readable_number(expected.alpha));
  if (f.bytes(2) != expected.alternative)
    return differs("alternative", excerpt(f.bytes(2)), expected.alternative);
  if (f.int64(3) != expected.created_at_ms)
    return differs("created_at", format_timestamp(f.int64(3)), format_timestamp(expected.created_at_ms));
  if (static_cast<std::uint64_t>(f.int64(4)) != expected.record_count)
    return differs("record_count", std::to_string(f.int64(4)), std::to_string(expected.record_count));
  const std::optional<std::int64_t> closed = f.null(5) ? std::nullopt : std::optional(f.int64(5));
  if (closed != expected.closed_at_ms)
    return differs("closed_at", shown_time(closed), shown_time(expected.closed_at_ms));
  return std::nullopt;
}

DecisionRow stored_row(const Fields& f) {
  DecisionRow stored;
  stored.step = static_cast<std::uint64_t>(f.int64(0));
  stored.id = std::string(f.bytes(1));
  stored.kind = std::string(f.bytes(2));
  stored.launch = static_cast<std::uint64_t>(f.int64(3));
  stored.p_value = f.opt_float8(4);
  stored.e_value = f.opt_float8(5);
  stored.level = f.float8(6);
  if (!f.null(7)) stored.rejected = f.boolean(7);
  stored.wealth = f.float8(8);
  stored.decided_at_ms = f.int64(9);
  stored.hash = std::string(f.bytes(10));
  return stored;
}

// The decisions rows against the record entries, both in step order: a row missing, a row
// without an entry, or the first column that differs.
std::optional<Problem> check_decision_rows(const PGresult* entries, const PGresult* rows,
                                           std::string_view stream, bool e_values) {
  const int n_entries = pq().PQntuples(entries);
  const int n_rows = pq().PQntuples(rows);
  const std::string table = "alphaledger.decisions row of stream " + in_quotes(stream) + " step ";
  const auto unmatched = [&](std::uint64_t step) {
    return Problem{step, table + std::to_string(step) + " has no ledger entry (a row added by hand?)"};
  };
  int j = 0;
  for (int i = 0; i < n_entries; ++i) {
    auto entry = decode_entry(Fields(entries, i).bytes(0));
    if (!entry) continue;  // the chain check reports it
    const DecisionRow expected = row_of(*entry, e_values);
    if (j >= n_rows || static_cast<std::uint64_t>(Fields(rows, j).int64(0)) > expected.step) {
      return Problem{expected.step,
                     table + std::to_string(expected.step) + " is missing (the ledger has that entry)"};
    }
    const DecisionRow stored = stored_row(Fields(rows, j));
    if (stored.step < expected.step) return unmatched(stored.step);
    if (auto d = first_difference(stored, expected)) {
      return Problem{stored.step, table + std::to_string(stored.step) + ": " + *d};
    }
    ++j;
  }
  if (j < n_rows) return unmatched(static_cast<std::uint64_t>(Fields(rows, j).int64(0)));
  return std::nullopt;
}

}  // namespace

Result<std::optional<Store::ProjectionProblem>> check_projection(PGconn* conn, std::string_view stream,
                                                                 const std::string& where,
                                                                 std::string_view secret) {
  const std::string what = "cannot verify ledger " + where;
  auto snap =
      read_snapshot(conn, stream, [&](const PGresult* r) { return translate(conn, r, what, secret); });
  if (!snap) return snap.error();
  if (pq().PQntuples(snap->config.get()) != 1 || pq().PQntuples(snap->head.get()) != 1) return std::optional<Problem>{};
  auto cfg = decode_config(Fields(snap->config.get(), 0).bytes(0));
  auto hd = decode_head(Fields(snap->head.get(), 0).bytes(0));
  if (!cfg || !hd) return std::optional<Problem>{};  // the chain check reports these
  if (auto problem = check_stream_row(snap->stream_row.get(), stream, *cfg, *hd)) return problem;
  return check_decision_rows(snap->entries.get(), snap->rows.get(), stream,
                             rule_takes_e_values(cfg->config.kind));
}

}  // namespace alphaledger::store::pg
