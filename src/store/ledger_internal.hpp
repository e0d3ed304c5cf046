// Pieces of the Ledger shared by src/store/ledger*.cpp: message helpers, the record walk, and the
// verification. Internal to the store.
//
// Thread-safety: free functions; each reads the store, which is safe from many threads.
#pragma once

#include <bit>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/result.hpp"
#include "alphaledger/store.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger::store {

// Whether the stream's rule takes the kind of number given (p-value, or e-value when e_value):
// an error naming `test` and the field it wants when not (src/store/ledger_decide.cpp).
Status evidence_fits(std::string_view stream, const RuleConfig& config, bool e_value, std::string_view test);

inline bool same_bits(double a, double b) {
  return std::bit_cast<std::uint64_t>(a) == std::bit_cast<std::uint64_t>(b);
}

inline std::string in_quotes(std::string_view s) {
  // Built by append: GCC 12's -Wrestrict misfires on "'" + std::string(s) + "'" (GCC PR 105651).
  std::string out;
  out.reserve(s.size() + 2);
  out.push_back('\'');
  out.append(s);
  out.push_back('\'');
  return out;
}

// For messages: the shortest text that reads back to the same double, in plain decimals when
// that stays short (0.0005 rather than 5e-04).
inline std::string readable_number(double v) {
  const double a = std::fabs(v);
  if (v == 0 || (a >= 1e-6 && a < 1e15)) {
    char buf[64];
    auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed);
    if (ec == std::errc()) return std::string(buf, ptr);
  }
  return format_number(v);
}

Error unknown_stream(std::string_view name, const std::string& where);

// Calls visit() for the stored records lo..hi of `stream` (1 <= lo; nothing when lo > hi), in
// step order, one at a time, reading those records and no others, until visit returns false.
// A record that is missing, out of place or undecodable: kCorruption naming the step (the caller
// knows from the head that steps up to hi exist). `where` is the ledger's location, for messages.
// Entries of either version (docs/ledger-format.md "Event record"): a launch gives no row; an
// abandon gives a row with abandoned set, visited only when `with_abandoned`.
Status visit_records(Store& store, const std::string& where, std::string_view stream, std::uint64_t lo,
                     std::uint64_t hi, const Ledger::DecisionVisitor& visit, bool with_abandoned = true);

struct ChainEntry;
// The same walk over the raw chain entries lo..hi.
Status visit_entries(Store& store, const std::string& where, std::string_view stream, std::uint64_t lo,
                     std::uint64_t hi, const std::function<bool(const ChainEntry&)>& visit);

struct StoredRunning;
// The running tests stored apart under running_prefix(stream) against `expected` (in launch
// order; empty: none may be stored): the first difference in words, or nothing (ledger_launch.cpp).
Result<std::optional<std::string>> running_keys_problem(Store& store, std::string_view stream,
                                                        const std::vector<StoredRunning>& expected);

// Ledger::verify over a store (ledger_verify.cpp).
Result<VerifyReport> verify_stream(Store& store, const std::string& where, std::string_view stream,
                                   const std::vector<Anchor>& anchors);

}  // namespace alphaledger::store
