// The one table from a library error kind to an HTTP status and code word (service/error_status.hpp,
// docs/http.md "Errors"). The statuses are the meanings of RFC 9110 section 15 (400, 404, 409, 500,
// 503); which kind gets which is our choice, written in docs/errors.md.
#include <doctest/doctest.h>

#include "alphaledger/result.hpp"
#include "service/error_status.hpp"

using namespace alphaledger;

TEST_CASE("HTTP errors: each kind has one status and code word") {
  struct Case {
    Error error;
    int status;
    const char* code;
  };
  const Case cases[] = {
      {invalid_input("p_value must be in [0, 1]"), 400, "invalid_input"},
      {not_found("no such thing"), 404, "not_found"},
      {conflict("test 'a' was already decided with another p-value"), 409, "conflict"},
      {corruption("ledger db is corrupt"), 500, "corruption"},
      {io_error("cannot write to ledger db: No space left on device"), 503, "storage"},
      {busy("cannot listen on 127.0.0.1:80: address in use"), 503, "busy"},
  };
  for (const auto& c : cases) {
    CAPTURE(c.error.message);
    const auto mapped = http::error_status(c.error);
    CHECK(mapped.status == c.status);
    CHECK(mapped.code == c.code);
  }
}

TEST_CASE("HTTP errors: an error's own code word replaces the kind's, the status stays the kind's") {
  const auto unknown = http::error_status(not_found("no stream named 's'", "unknown_stream"));
  CHECK(unknown.status == 404);
  CHECK(unknown.code == "unknown_stream");
  const auto verify = http::error_status(conflict("stream s fails verification", "verification_failed"));
  CHECK(verify.status == 409);
  CHECK(verify.code == "verification_failed");
}

TEST_CASE("HTTP errors: storage failures are told apart from requests that were wrong") {
  CHECK(is_storage_failure(ErrorKind::kCorruption));
  CHECK(is_storage_failure(ErrorKind::kIOError));
  CHECK(is_storage_failure(ErrorKind::kBusy));
  CHECK_FALSE(is_storage_failure(ErrorKind::kInvalidArgument));
  CHECK_FALSE(is_storage_failure(ErrorKind::kNotFound));
  CHECK_FALSE(is_storage_failure(ErrorKind::kConflict));
}
