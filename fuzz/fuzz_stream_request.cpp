// The body of POST /v1/streams: parse_json_object, stream_request_from_json, resolve_config.
#include "alphaledger/rules.hpp"
#include "alphaledger/service.hpp"
#include "harness/json_input.hpp"
#include "service/json_input.hpp"
#include "fuzz_support.hpp"

using namespace alphaledger;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  auto j = parse_json_object(fuzz::as_text(data, size));
  if (!j) {
    fuzz::check_message(j.error().message);
    return 0;
  }
  auto request = stream_request_from_json(*j);
  if (!request) {
    fuzz::check_message(request.error().message);
    return 0;
  }
  auto config = resolve_config(request->spec);
  if (!config) {
    fuzz::require(!config.error().message.empty(), "an error without a message");
    return 0;
  }
  (void)describe_config(*config);
  return 0;
}
