// The in-memory store (include/alphaledger/store.hpp).
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

Status MemoryStore::write_if(const WriteBatch& batch, std::string_view key,
                             const std::optional<std::string>& expected, bool /*sync*/) {
  std::lock_guard lock(mu_);
  auto it = data_.find(key);
  const bool same = it == data_.end() ? !expected : (expected && *expected == it->second);
  if (!same) return head_moved(key);
  for (const auto& op : batch.ops) {
    if (op.erase) {
      if (auto at = data_.find(op.key); at != data_.end()) data_.erase(at);
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

}  // namespace alphaledger
