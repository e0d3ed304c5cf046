// An HTTP body or pipe line: parse_json_object then test_from_json (both forms), on any bytes.
#include <cmath>

#include "alphaledger/service.hpp"
#include "harness/json_input.hpp"
#include "harness/json_text.hpp"
#include "service/json_input.hpp"
#include "fuzz_support.hpp"

using namespace alphaledger;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  auto j = parse_json_object(fuzz::as_text(data, size));
  if (!j) {
    fuzz::check_message(j.error().message);
    return 0;
  }
  fuzz::require(j->is_object(), "parse_json_object returned something other than an object");
  for (int form = 0; form < 2; ++form) {
    auto t = form == 0 ? test_from_json(*j) : test_from_json(*j, Alternative::kLess);
    if (!t) {
      fuzz::check_message(t.error().message);
      continue;
    }
    fuzz::require(validate_test_id(t->id).ok(), "an accepted id that validate_test_id refuses");
    fuzz::require(t->p_value >= 0 && t->p_value <= 1 && !std::signbit(t->p_value),
                  "an accepted p-value outside [0, 1] or -0");
  }
  // Answers are written with json_text: it must not throw on anything the reader accepted.
  (void)json_text(nlohmann::ordered_json::parse(json_text(*j)));
  return 0;
}
