// The Store defaults that do not depend on a backend (include/alphaledger/store.hpp): the
// conditional write for stores that only this process writes, the head_moved error, and the
// choice of backend by ledger location.
#include <mutex>

#include "alphaledger/store.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {

Error head_moved(std::string_view key) {
  return conflict("the value at " + excerpt(key) +
                      " changed since it was read (another writer got there first); read it again and redo",
                  "head_moved");
}

// Correct for a store that only this object writes, and whose writers all come through here:
// the compare and the write happen under one lock, so no other write_if() falls between them.
// RocksDB uses it: it is never shared(), so the ledger does not call it there except in tests.
Status Store::write_if(const WriteBatch& batch, std::string_view key,
                       const std::optional<std::string>& expected, bool sync) {
  static std::mutex mu;
  std::lock_guard lock(mu);
  auto now = get(key);
  if (!now) return now.error();
  if (*now != expected) return head_moved(key);
  return write(batch, sync);
}

Result<std::unique_ptr<Store>> open_store_at(const std::string& location, const RocksStoreOptions& options) {
  if (is_postgres_uri(location)) {
    PostgresStoreOptions pg;
    pg.create_if_missing = options.create_if_missing;
    pg.read_only = options.read_only;
    return open_postgres_store(location, pg);
  }
  return open_rocksdb_store(location, options);
}

}  // namespace alphaledger
