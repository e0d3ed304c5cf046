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

// What went wrong, said in terms of the library (after the leveldb Status model), not of any front
// end: the command line maps kinds to exit codes (src/cli/cli_errors.cpp) and the HTTP service to
// statuses (src/service/http_service.cpp), each in one place; docs/errors.md has both tables.
// The numbers are only names for the kinds: they are not exit codes, and not stored on disk.
enum class ErrorKind : int {
  kInvalidArgument = 1,  // the input or a parameter is wrong; nothing was changed
  kNotFound = 2,         // what was asked for does not exist: an unknown stream, no ledger at a path
  kConflict = 3,         // contradicts what is recorded: another p-value for a decided id, a closed
                         // stream, another configuration for an existing name, a verify mismatch
  kCorruption = 4,       // stored data is damaged or in a form this version cannot read
  kIOError = 5,          // the system failed to read or write: disk, file, socket, standard input
  kBusy = 6,             // in use elsewhere: the ledger's lock is held, the port is taken, the stop
                         // signals are already watched; may work later
};

// A kind's name for people and logs: "invalid argument", "not found", ...
inline const char* kind_name(ErrorKind k) {
  switch (k) {
    case ErrorKind::kInvalidArgument:
      return "invalid argument";
    case ErrorKind::kNotFound:
      return "not found";
    case ErrorKind::kConflict:
      return "conflict";
    case ErrorKind::kCorruption:
      return "corruption";
    case ErrorKind::kIOError:
      return "I/O error";
    case ErrorKind::kBusy:
      return "busy";
  }
  return "unknown";
}

// True for the kinds where the storage underneath failed (corruption, I/O error, busy), as opposed
// to a request that was wrong or refused: a batch stops at these, and a service reports itself
// unhealthy.
inline bool is_storage_failure(ErrorKind k) {
  return k == ErrorKind::kCorruption || k == ErrorKind::kIOError || k == ErrorKind::kBusy;
}

struct Error {
  ErrorKind kind = ErrorKind::kInvalidArgument;
  std::string message;  // says what happened, where, and what is accepted
  // A short machine word where the kind is too coarse for a program reading the error, e.g.
  // "unknown_stream" or "no_ledger" (both kNotFound), "verification_failed" (kConflict); empty
  // otherwise. Front ends show it as the error's code word, in place of the kind's own word.
  std::string code = {};
  // For front ends that add advice of their own (the command line adds the command to run next):
  // a finer word than `code`, never printed ("closed_stream", "damaged_ledger", "damaged_record"),
  // and what the error is about (a stream name, a ledger folder). Both empty when there is no advice.
  std::string reason = {};
  std::string subject = {};
};

// Invalid input about one named parameter: the message is "FIELD REST", the reason "field" and
// the subject FIELD (as the library names it, e.g. nonnull_fraction), so that a front end can show
// the parameter under its own name (the command line shows --nonnull-fraction).
inline Error invalid_field(std::string field, std::string rest) {
  Error e{ErrorKind::kInvalidArgument, field + " " + rest};
  e.reason = "field";
  e.subject = std::move(field);
  return e;
}

// `e` with another message: kind, code, reason and subject kept.
inline Error with_message(Error e, std::string message) {
  e.message = std::move(message);
  return e;
}

// `e` with reason and subject set (see Error).
inline Error with_reason(Error e, std::string reason, std::string subject) {
  e.reason = std::move(reason);
  e.subject = std::move(subject);
  return e;
}

inline Error invalid_input(std::string message) { return {ErrorKind::kInvalidArgument, std::move(message)}; }
// The error's machine word, as front ends show it (`code` in JSON errors): the error's own `code`
// when it has one, else the kind's word: invalid_input, not_found, conflict, corruption, storage
// (I/O errors) or busy.
inline std::string code_word(const Error& e) {
  if (!e.code.empty()) return e.code;
  switch (e.kind) {
    case ErrorKind::kInvalidArgument:
      return "invalid_input";
    case ErrorKind::kNotFound:
      return "not_found";
    case ErrorKind::kConflict:
      return "conflict";
    case ErrorKind::kCorruption:
      return "corruption";
    case ErrorKind::kIOError:
      return "storage";
    case ErrorKind::kBusy:
      return "busy";
  }
  return "internal";
}

inline Error not_found(std::string message, std::string code = {}) {
  return {ErrorKind::kNotFound, std::move(message), std::move(code)};
}
inline Error conflict(std::string message, std::string code = {}) {
  return {ErrorKind::kConflict, std::move(message), std::move(code)};
}
inline Error corruption(std::string message) { return {ErrorKind::kCorruption, std::move(message)}; }
inline Error io_error(std::string message) { return {ErrorKind::kIOError, std::move(message)}; }
inline Error busy(std::string message) { return {ErrorKind::kBusy, std::move(message)}; }

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
