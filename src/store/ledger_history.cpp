// Reading a stream's records in step order, a range at a time (Ledger::history_page,
// Ledger::for_each_decision, Ledger::history).
#include <optional>

#include "store/codec.hpp"
#include "store/ledger_internal.hpp"

namespace alphaledger::store {

Status visit_records(Store& store, const std::string& where, std::string_view stream, std::uint64_t lo,
                     std::uint64_t hi, const Ledger::DecisionVisitor& visit, bool with_abandoned) {
  return visit_entries(store, where, stream, lo, hi, [&](const ChainEntry& e) {
    auto row = history_row(e);
    if (!row || (row->abandoned && !with_abandoned)) return true;
    return visit(*row);
  });
}

Status visit_entries(Store& store, const std::string& where, std::string_view stream, std::uint64_t lo,
                     std::uint64_t hi, const std::function<bool(const ChainEntry&)>& visit) {
  if (lo == 0 || lo > hi) return {};
  auto problem = [&](std::uint64_t step, const std::string& what) {
    return with_reason(corruption("ledger " + where + ", stream " + in_quotes(stream) + ": the record for step " +
                                  std::to_string(step) + " " + what),
                       "damaged_record", std::string(stream));
  };
  std::uint64_t expected = lo;
  std::string expected_key = record_key(stream, lo);  // rewritten in place for each next step
  std::optional<Error> bad;
  bool stopped = false;
  // One scan per key block (record_range_prefixes): the store reads the records lo..hi and no
  // others, however long the stream.
  for (const auto& prefix : record_range_prefixes(stream, lo, hi)) {
    auto s = store.scan(prefix, [&](std::string_view key, std::string_view value) {
      if (key != expected_key) {
        bad = problem(expected, "is missing");
        return false;
      }
      auto rec = decode_entry(value);
      if (!rec) {
        bad = problem(expected, "cannot be read: " + rec.error().message);
        return false;
      }
      if (rec->entry() != expected) {
        bad = problem(expected, "says step " + std::to_string(rec->entry()));
        return false;
      }
      ++expected;
      set_record_key_step(expected_key, expected);
      if (!visit(*rec)) {
        stopped = true;
        return false;
      }
      return true;
    });
    if (!s) return s.error();
    if (bad) return *bad;
    if (stopped) return {};
  }
  if (expected <= hi) return problem(expected, "is missing");
  return {};
}

}  // namespace alphaledger::store
