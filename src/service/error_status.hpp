// The one mapping from a library error to an HTTP status and code word (docs/http.md "Errors",
// docs/errors.md). Every route answers its errors through it. Internal to the service.
#pragma once

#include <string>

#include "alphaledger/result.hpp"

namespace alphaledger::http {

struct ErrorStatus {
  int status = 500;
  std::string code;  // the error's own code word when it has one (e.g. unknown_stream), else the kind's
};

//   kInvalidArgument 400 invalid_input    kNotFound 404 not_found    kConflict 409 conflict
//   kCorruption      500 corruption       kIOError  503 storage      kBusy     503 busy
ErrorStatus error_status(const Error& e);

}  // namespace alphaledger::http
