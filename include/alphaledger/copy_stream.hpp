// Copying one stream, key for key, from one Store to another: the way a stream moves between
// ledger backends (a folder and a PostgreSQL database, docs/ledger.md "Moving a stream"). Only the
// Store interface is used, so it works between any two stores.
//
// Example (compiled only):
//   RocksStoreOptions reading{.create_if_missing = false, .read_only = true};
//   auto from = open_rocksdb_store("old.db", reading);
//   auto to = open_rocksdb_store("new.db");
//   auto copied = copy_stream(**from, **to, "checkout");  // records, keys, writes
//
// Thread-safety: as the stores underneath; a writer on `from` during the copy makes it fail (below).
#pragma once

#include <cstddef>
#include <cstdint>
#include <string_view>

#include "alphaledger/result.hpp"
#include "alphaledger/store.hpp"

namespace alphaledger {

struct CopyOptions {
  std::size_t keys_per_write = 4096;  // keys in one write() to the target (at least 1); Default: 4096
};

struct CopySummary {
  std::uint64_t records = 0;            // chain entries (r/ keys) copied
  std::uint64_t keys = 0;               // every key copied, the configuration and the head included
  std::uint64_t writes = 0;             // write() calls on the target, the cleanup of leftovers included
  std::uint64_t leftovers_removed = 0;  // keys of an earlier copy that stopped half-way, removed first
};

// Copies every key of stream `stream` (c/, h/, r/, i/, l/, t/; docs/ledger-format.md) from `from`
// to `to`, in writes of at most options.keys_per_write keys, records first and the configuration
// and head in the LAST write: until that write the target does not hold the stream (nothing lists
// it, and an interrupted copy can simply be run again: its leftover keys, which belong to no
// stream, are removed first). The target gets the ledger's format version key if it is empty.
// The copy is not verified here; open the target as a Ledger and verify() it.
// Errors (the target's stream is absent after any of them):
//   - kInvalidArgument: a bad stream name; keys_per_write 0.
//   - kNotFound (code unknown_stream): `from` has no such stream.
//   - kConflict (code stream_exists): `to` already has the stream (nothing is written);
//     (code not_a_ledger) `to` holds data but no ledger format version;
//     (code format_mismatch) the two stores have different format versions;
//     (code changed_during_copy) the stream's head in `from` changed while copying (a writer ran).
//   - the stores' own errors (kIOError, kCorruption, kBusy), with which store failed.
Result<CopySummary> copy_stream(Store& from, Store& to, std::string_view stream,
                                const CopyOptions& options = {});

}  // namespace alphaledger
