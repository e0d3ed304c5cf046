// The test hooks of the store layer (src/store/faulty_store.hpp).
#include "store/faulty_store.hpp"

namespace alphaledger {

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

std::map<std::string, std::string> copy_contents(MemoryStore& store) {
  std::map<std::string, std::string> out;
  // MemoryStore::scan cannot fail.
  (void)store.scan("", [&](std::string_view key, std::string_view value) {
    out.emplace(std::string(key), std::string(value));
    return true;
  });
  return out;
}

}  // namespace alphaledger
