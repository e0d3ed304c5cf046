// Result<T>: a value or an Error, the one error-return type of the library.
//
// Every fallible library function returns Result<T> (or Status = Result<void>) and never throws
// for bad input. Exceptions are used only at the edges (CLI, HTTP handlers).
//
// Example:
//   Result<double> r = parse_p_value_text("1.3");   // test_log.hpp
//   if (!r) std::cerr << r.error().message << '\n';   // "p_value must be a number in [0, 1], got 1.3"
#pragma once

#include <cassert>
#include <string>
#include <utility>
#include <variant>

namespace alphaledger {

// What went wrong, in the terms of the command-line contract. The numbers are the process exit
// codes the CLI maps each kind to.
enum class ErrorKind : int {
  kInvalidInput = 2,  // bad usage or invalid input; nothing was changed
  kRefused = 3,       // refused by the ledger: unknown stream, conflict, verification mismatch
  kStorage = 4,       // storage failure: locked, corrupt, disk error
};

struct Error {
  ErrorKind kind = ErrorKind::kInvalidInput;
  std::string message;  // says what was wrong, where, and what is accepted
};

inline Error invalid_input(std::string message) { return {ErrorKind::kInvalidInput, std::move(message)}; }
inline Error refused(std::string message) { return {ErrorKind::kRefused, std::move(message)}; }
inline Error storage_error(std::string message) { return {ErrorKind::kStorage, std::move(message)}; }

// Holds either a T or an Error. Thread-compatible (like std::variant).
template <typename T>
class [[nodiscard]] Result {
 public:
  Result(T value) : v_(std::move(value)) {}      // NOLINT: implicit by design, as std::expected
  Result(Error error) : v_(std::move(error)) {}  // NOLINT

  bool ok() const { return v_.index() == 0; }
  explicit operator bool() const { return ok(); }

  // REQUIRES: ok()
  T& value() & {
    assert(ok());
    return std::get<0>(v_);
  }
  const T& value() const& {
    assert(ok());
    return std::get<0>(v_);
  }
  T&& value() && {
    assert(ok());
    return std::get<0>(std::move(v_));
  }
  T& operator*() & { return value(); }
  const T& operator*() const& { return value(); }
  T* operator->() { return &value(); }
  const T* operator->() const { return &value(); }

  // REQUIRES: !ok()
  const Error& error() const {
    assert(!ok());
    return std::get<1>(v_);
  }

 private:
  std::variant<T, Error> v_;
};

template <>
class [[nodiscard]] Result<void> {
 public:
  Result() = default;
  Result(Error error) : error_(std::move(error)), ok_(false) {}  // NOLINT
  bool ok() const { return ok_; }
  explicit operator bool() const { return ok_; }
  const Error& error() const {
    assert(!ok_);
    return error_;
  }

 private:
  Error error_;
  bool ok_ = true;
};

using Status = Result<void>;

}  // namespace alphaledger
