// The in-memory store, the fault-injecting wrapper and the borrowed view (include/alphaledger/store.hpp).
#include "alphaledger/store.hpp"

namespace alphaledger {

Result<std::optional<std::string>> MemoryStore::get(std::string_view key) {
  std::lock_guard lock(mu_);
  auto it = data_.find(key);
  if (it == data_.end()) return std::optional<std::string>{};
  return std::optional<std::string>{it->second};
}

Status MemoryStore::write(const WriteBatch& batch, bool /*sync*/) {
  std::lock_guard lock(mu_);
  for (const auto& op : batch.ops) {
    if (op.erase) {
      auto it = data_.find(op.key);
      if (it != data_.end()) data_.erase(it);
    } else {
      data_.insert_or_assign(op.key, op.value);
    }
  }
  return {};
}

Status MemoryStore::scan(std::string_view prefix, const Visitor& visit) {
  // Copy the matching range first: one consistent snapshot, and visit() may call back into us.
  std::vector<std::pair<std::string, std::string>> snapshot;
  {
    std::lock_guard lock(mu_);
    for (auto it = data_.lower_bound(prefix); it != data_.end() && it->first.starts_with(prefix); ++it) {
      snapshot.emplace_back(it->first, it->second);
    }
  }
  for (const auto& [k, v] : snapshot) {
    if (!visit(k, v)) break;
  }
  return {};
}

std::map<std::string, std::string> MemoryStore::dump() const {
  std::lock_guard lock(mu_);
  return {data_.begin(), data_.end()};
}

void FaultyStore::fail_write_in(std::uint64_t n) {
  std::lock_guard lock(mu_);
  countdown_ = n;
}

void FaultyStore::fail_all_writes(std::string message) {
  std::lock_guard lock(mu_);
  fail_all_ = std::move(message);
}

void FaultyStore::clear_faults() {
  std::lock_guard lock(mu_);
  countdown_ = 0;
  fail_all_.reset();
}

std::uint64_t FaultyStore::writes_attempted() const {
  std::lock_guard lock(mu_);
  return attempted_;
}

std::uint64_t FaultyStore::writes_failed() const {
  std::lock_guard lock(mu_);
  return failed_;
}

std::optional<std::string> FaultyStore::failing() const {
  {
    std::lock_guard lock(mu_);
    if (last_failure_) return last_failure_;
  }
  return inner_.failing();
}

Status FaultyStore::write(const WriteBatch& batch, bool sync) {
  {
    std::lock_guard lock(mu_);
    ++attempted_;
    if (fail_all_) {
      ++failed_;
      last_failure_ = "write to " + inner_.describe() + " failed: " + *fail_all_ + " (injected fault)";
      return io_error(*last_failure_);
    }
    if (countdown_ > 0 && --countdown_ == 0) {
      ++failed_;
      last_failure_ = "write to " + inner_.describe() + " failed: I/O error (injected fault, write " +
                      std::to_string(attempted_) + ")";
      return io_error(*last_failure_);
    }
  }
  auto s = inner_.write(batch, sync);
  std::lock_guard lock(mu_);
  if (s) last_failure_.reset();
  return s;
}

namespace {

class BorrowedStore final : public Store {
 public:
  explicit BorrowedStore(Store& inner) : inner_(inner) {}
  Result<std::optional<std::string>> get(std::string_view key) override { return inner_.get(key); }
  Status write(const WriteBatch& batch, bool sync) override { return inner_.write(batch, sync); }
  Status scan(std::string_view prefix, const Visitor& visit) override { return inner_.scan(prefix, visit); }
  std::string describe() const override { return inner_.describe(); }
  bool read_only() const override { return inner_.read_only(); }
  std::optional<std::string> failing() const override { return inner_.failing(); }

 private:
  Store& inner_;
};

}  // namespace

std::unique_ptr<Store> borrow_store(Store& inner) { return std::make_unique<BorrowedStore>(inner); }

}  // namespace alphaledger
