// Test hooks of the store layer, kept out of the public headers: a fault-injecting wrapper, a
// non-owning view of a store, and a copy of a store's whole contents. Project-internal (the tests
// and benchmarks include src/); not installed.
#pragma once

#include <cstdint>
#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>

#include "alphaledger/result.hpp"
#include "alphaledger/store.hpp"

namespace alphaledger {

// Wraps a store and fails writes on demand, as a full or failing disk would. A failed write
// never reaches the wrapped store. Reads pass through unchanged.
//
// Thread-safety: as the wrapped store; the fault settings are guarded by a mutex.
class FaultyStore final : public Store {
 public:
  // REQUIRES: `inner` outlives this wrapper.
  explicit FaultyStore(Store& inner) : inner_(inner) {}

  // The n-th write from now (1 = the next one) fails once; later writes succeed.
  void fail_write_in(std::uint64_t n);
  // Every write fails until cleared, with `message` (e.g. "No space left on device").
  void fail_all_writes(std::string message);
  void clear_faults();
  std::uint64_t writes_attempted() const;  // successful and failed, since construction
  std::uint64_t writes_failed() const;

  Result<std::optional<std::string>> get(std::string_view key) override { return inner_.get(key); }
  Status write(const WriteBatch& batch, bool sync = true) override;
  Status scan(std::string_view prefix, const Visitor& visit) override { return inner_.scan(prefix, visit); }
  std::string describe() const override { return inner_.describe(); }
  bool read_only() const override { return inner_.read_only(); }
  // The injected fault's message while the last write failed; else the wrapped store's answer.
  std::optional<std::string> failing() const override;

 private:
  Store& inner_;
  mutable std::mutex mu_;
  std::optional<std::string> last_failure_;
  std::uint64_t countdown_ = 0;  // 0: no one-shot fault armed
  std::optional<std::string> fail_all_;
  std::uint64_t attempted_ = 0;
  std::uint64_t failed_ = 0;
};

// A non-owning view of `inner` as a Store, for handing a store you keep to Ledger::open (tests
// reopen a ledger over the same in-memory store). REQUIRES: `inner` outlives the returned object.
std::unique_ptr<Store> borrow_store(Store& inner);

// A copy of every key and value of `store` (tests compare before and after).
std::map<std::string, std::string> copy_contents(MemoryStore& store);

}  // namespace alphaledger
