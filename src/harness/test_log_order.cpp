// Checks and ordering of a whole log once its rows are read: unique ids, the launched_at column,
// and the order by finished_at (docs/formats.md).
#include <algorithm>
#include <cmath>
#include <functional>
#include <string>
#include <vector>

#include "alphaledger/test_log.hpp"
#include "harness/test_log_internal.hpp"

namespace alphaledger {
namespace detail {

// Refuses the first row (in file order) whose id an earlier row has, naming both lines. One
// open-addressing table of row numbers (0 = empty), at most half full; ids compare in the arena.
template <typename Slot>
Status check_unique_ids(const CompactLog& log, std::string_view source) {
  std::size_t cap = 16;
  while (cap < 2 * log.records.size()) cap *= 2;
  std::vector<Slot> table(cap, 0);
  const std::hash<std::string_view> hash;
  for (std::size_t i = 0; i < log.records.size(); ++i) {
    const std::string_view id = log.id(i);
    std::size_t at = hash(id) & (cap - 1);
    for (;; at = (at + 1) & (cap - 1)) {
      if (table[at] == 0) {
        table[at] = static_cast<Slot>(i + 1);
        break;
      }
      const CompactRecord& first = log.records[table[at] - 1];
      if (log.id(first) == id) {
        return invalid_input(where(source, log.records[i].line) + "duplicate id '" + std::string(id) +
                             "' (first at line " + std::to_string(first.line) +
                             "); ids must be unique in a log");
      }
    }
  }
  return {};
}

// A log with launched_at (a CSV column, or a key of any JSON Lines row) needs it on every row: the
// first row without it (in file order) is refused. Sets log.has_launch.
Status check_launch_column(CompactLog& log, bool csv_column) {
  const auto has = [](const CompactRecord& r) { return (r.flags & CompactRecord::kHasLaunch) != 0; };
  const auto first_with = std::find_if(log.records.begin(), log.records.end(), has);
  if (!csv_column && first_with == log.records.end()) return {};
  log.has_launch = true;
  const auto first_without = std::find_if_not(log.records.begin(), log.records.end(), has);
  if (first_without == log.records.end()) return {};
  const std::string id(log.id(*first_without));
  if (csv_column) {
    return invalid_input(where(log.source, first_without->line) + "test '" + id +
                         "': launched_at is empty; when the log has a launched_at column every row needs "
                         "a launch time (ISO 8601 date or date-time, or a number), or leave the column out");
  }
  return invalid_input(where(log.source, first_without->line) + "test '" + id +
                       "': no launched_at, but line " + std::to_string(first_with->line) +
                       " has one; when any row has launched_at every row needs it (ISO 8601 date or "
                       "date-time, or a number)");
}

Status check_evidence_columns(CompactLog& log) {
  const auto has_e = [](const CompactRecord& r) { return (r.flags & CompactRecord::kHasE) != 0; };
  const auto has_p = [](const CompactRecord& r) { return (r.flags & CompactRecord::kNoP) == 0; };
  const auto first_e = std::find_if(log.records.begin(), log.records.end(), has_e);
  if (first_e != log.records.end()) {
    const auto without = std::find_if_not(log.records.begin(), log.records.end(), has_e);
    if (without != log.records.end()) {
      return invalid_input(where(log.source, without->line) + "test '" + std::string(log.id(*without)) +
                           "': no e_value, but line " + std::to_string(first_e->line) +
                           " has one; when any row has e_value every row needs it (a number >= 0)");
    }
  }
  const auto first_p = std::find_if(log.records.begin(), log.records.end(), has_p);
  if (first_p != log.records.end()) {
    const auto without = std::find_if_not(log.records.begin(), log.records.end(), has_p);
    if (without != log.records.end()) {
      return invalid_input(where(log.source, without->line) + "test '" + std::string(log.id(*without)) +
                           "': no p_value, but line " + std::to_string(first_p->line) +
                           " has one; when any row has p_value every row needs it (a number in [0, 1])");
    }
  }
  log.has_e_values = !log.records.empty() && first_e != log.records.end();
  log.has_p_values = log.records.empty() || first_p != log.records.end();
  return {};
}

// A row without finished_at keeps its place right after the row before it (docs/formats.md). A
// log whose times already ascend keeps its order without sorting (a stable sort would too).
void order_by_time(CompactLog& log) {
  double last = -INFINITY;
  bool ascending = true;
  for (const auto& r : log.records) {
    if ((r.flags & CompactRecord::kHasTime) == 0) continue;
    if (r.finished_at < last) {
      ascending = false;
      break;
    }
    last = r.finished_at;
  }
  if (ascending) return;
  std::vector<std::pair<double, std::size_t>> keys;
  keys.reserve(log.records.size());
  last = -INFINITY;
  for (std::size_t i = 0; i < log.records.size(); ++i) {
    if (log.records[i].flags & CompactRecord::kHasTime) last = log.records[i].finished_at;
    keys.emplace_back(last, i);
  }
  std::stable_sort(keys.begin(), keys.end(), [](const auto& a, const auto& b) { return a.first < b.first; });
  // Moves the records into place along the permutation's cycles: no second copy of the log.
  constexpr std::size_t kDone = static_cast<std::size_t>(-1);
  for (std::size_t i = 0; i < keys.size(); ++i) {
    if (keys[i].second == kDone) continue;
    const CompactRecord first = log.records[i];
    for (std::size_t j = i;;) {
      const std::size_t from = keys[j].second;
      keys[j].second = kDone;
      if (from == i) {
        log.records[j] = first;
        break;
      }
      log.records[j] = log.records[from];
      j = from;
    }
  }
}

template Status check_unique_ids<std::uint32_t>(const CompactLog& log, std::string_view source);
template Status check_unique_ids<std::uint64_t>(const CompactLog& log, std::string_view source);

}  // namespace detail
}  // namespace alphaledger
