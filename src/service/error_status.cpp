// The error -> HTTP status table (src/service/error_status.hpp).
#include "service/error_status.hpp"

namespace alphaledger::http {

ErrorStatus error_status(const Error& e) {
  const auto with = [&](int status, const char* word) {
    return ErrorStatus{status, e.code.empty() ? std::string(word) : e.code};
  };
  switch (e.kind) {
    case ErrorKind::kInvalidArgument:
      return with(400, "invalid_input");
    case ErrorKind::kNotFound:
      return with(404, "not_found");
    case ErrorKind::kConflict:
      return with(409, "conflict");
    case ErrorKind::kCorruption:
      return with(500, "corruption");
    case ErrorKind::kIOError:
      return with(503, "storage");
    case ErrorKind::kBusy:
      return with(503, "busy");
  }
  return {500, "internal"};
}

}  // namespace alphaledger::http
