// Copying one stream between two Stores (include/alphaledger/copy_stream.hpp).
#include "alphaledger/copy_stream.hpp"

#include <array>
#include <string>

#include "store/codec.hpp"
#include "store/ledger_internal.hpp"

namespace alphaledger {
namespace {

using store::in_quotes;

// `e` with the store it came from named in front, kind and code kept.
Error from_store(const Error& e, const char* which, const Store& s) {
  return with_message(e, std::string(which) + " " + s.describe() + ": " + e.message);
}

// The prefixes of a stream's many-key families, in the order they are copied.
std::array<std::string, 4> family_prefixes(std::string_view stream) {
  return {store::record_prefix(stream), store::index_prefix(stream), "l/" + std::string(stream) + "/",
          store::running_prefix(stream)};
}

// Collects ops and writes them to `to` every `limit` ops.
class BatchWriter {
 public:
  BatchWriter(Store& to, std::size_t limit, CopySummary& summary)
      : to_(to), limit_(limit), summary_(summary) {}

  Status add_put(std::string_view key, std::string_view value) {
    batch_.put(std::string(key), std::string(value));
    return batch_.ops.size() >= limit_ ? flush() : Status{};
  }
  Status add_erase(std::string_view key) {
    batch_.erase(std::string(key));
    return batch_.ops.size() >= limit_ ? flush() : Status{};
  }
  Status flush() {
    if (batch_.empty()) return {};
    if (auto s = to_.write(batch_, /*sync=*/true); !s) return from_store(s.error(), "writing to", to_);
    ++summary_.writes;
    batch_.ops.clear();
    return {};
  }

 private:
  Store& to_;
  std::size_t limit_;
  CopySummary& summary_;
  WriteBatch batch_;
};

// Scans `prefix` of `s`, calling add(key, value) for each key until it fails.
template <typename Add>
Status scan_all(Store& s, const char* which, std::string_view prefix, Add add) {
  Status failed;
  auto scanned = s.scan(prefix, [&](std::string_view key, std::string_view value) {
    failed = add(key, value);
    return failed.ok();
  });
  if (!scanned) return from_store(scanned.error(), which, s);
  return failed;
}

// The target is a ledger of the source's format, or empty (then it gets the format key first).
Status check_formats(Store& from, Store& to, BatchWriter& writer) {
  auto from_format = from.get(store::kFormatKey);
  if (!from_format) return from_store(from_format.error(), "reading", from);
  if (!*from_format) return corruption("reading " + from.describe() + ": holds no ledger format version");
  auto to_format = to.get(store::kFormatKey);
  if (!to_format) return from_store(to_format.error(), "reading", to);
  if (*to_format) {
    if (**to_format != **from_format) {
      return conflict("the ledgers " + from.describe() + " and " + to.describe() +
                          " have different format versions; copy with a build that reads both",
                      "format_mismatch");
    }
    return {};
  }
  bool empty = true;
  auto scanned = to.scan("", [&](std::string_view, std::string_view) { return empty = false; });
  if (!scanned) return from_store(scanned.error(), "reading", to);
  if (!empty) {
    return conflict(to.describe() +
                        " holds data but no ledger format version: not a ledger; copy into "
                        "a ledger or an empty location",
                    "not_a_ledger");
  }
  if (auto s = writer.add_put(store::kFormatKey, **from_format); !s) return s;
  return writer.flush();
}

}  // namespace

Result<CopySummary> copy_stream(Store& from, Store& to, std::string_view stream, const CopyOptions& options) {
  if (auto s = validate_stream_name(stream); !s) return s.error();
  if (options.keys_per_write == 0) return invalid_input("keys_per_write must be at least 1");
  const std::string config_key = store::config_key(stream);
  const std::string head_key = store::head_key(stream);

  auto config = from.get(config_key);
  if (!config) return from_store(config.error(), "reading", from);
  auto head = from.get(head_key);
  if (!head) return from_store(head.error(), "reading", from);
  if (!*config || !*head) {
    return not_found("no stream named " + in_quotes(stream) + " in ledger " + from.describe(),
                     "unknown_stream");
  }
  for (const auto* key : {&config_key, &head_key}) {
    auto there = to.get(*key);
    if (!there) return from_store(there.error(), "reading", to);
    if (*there) {
      return conflict("ledger " + to.describe() + " already has a stream named " + in_quotes(stream) +
                          "; nothing was copied (copy into another ledger, or under another name there)",
                      "stream_exists");
    }
  }

  CopySummary summary;
  BatchWriter writer(to, options.keys_per_write, summary);
  if (auto s = check_formats(from, to, writer); !s) return s.error();

  // Keys of the stream without its configuration and head belong to no stream: only a copy that
  // stopped half-way leaves them. Remove them so they cannot mix with this copy.
  const auto prefixes = family_prefixes(stream);
  for (const auto& prefix : prefixes) {
    auto s = scan_all(to, "reading", prefix, [&](std::string_view key, std::string_view) {
      ++summary.leftovers_removed;
      return writer.add_erase(key);
    });
    if (!s) return s.error();
  }
  if (auto s = writer.flush(); !s) return s.error();

  for (const auto& prefix : prefixes) {
    const bool records = prefix.starts_with("r/");
    auto s = scan_all(from, "reading", prefix, [&](std::string_view key, std::string_view value) {
      ++summary.keys;
      if (records) ++summary.records;
      return writer.add_put(key, value);
    });
    if (!s) return s.error();
  }
  if (auto s = writer.flush(); !s) return s.error();

  // A writer on the source between the first read of the head and now: the keys copied may be of
  // different moments. The head is not written, so the target does not hold the stream.
  auto head_after = from.get(head_key);
  if (!head_after) return from_store(head_after.error(), "reading", from);
  if (*head_after != *head) {
    return conflict("stream " + in_quotes(stream) + " changed in " + from.describe() +
                        " while it was copied (a writer is running); the target does not hold it: stop "
                        "the writers and copy again",
                    "changed_during_copy");
  }
  WriteBatch last;
  last.put(config_key, **config);
  last.put(head_key, **head);
  // Only if the target still has no head: two copies of one stream into a shared store (another
  // process) cannot both create it.
  if (auto s = to.write_if(last, head_key, std::nullopt, /*sync=*/true); !s) {
    if (is_head_moved(s.error())) {
      return conflict("ledger " + to.describe() + " got a stream named " + in_quotes(stream) +
                          " from another writer while copying; this copy's stream was not written",
                      "stream_exists");
    }
    return from_store(s.error(), "writing to", to);
  }
  ++summary.writes;
  summary.keys += 2;
  return summary;
}

}  // namespace alphaledger
