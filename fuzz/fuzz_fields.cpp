// The one reading of single values (docs/formats.md, "One meaning for each input"): numbers,
// p-values, times, ids and excerpts, on any text.
#include <charconv>
#include <cmath>

#include "fuzz_support.hpp"

using namespace alphaledger;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text = fuzz::as_text(data, size);
  if (auto p = parse_p_value_text(text)) {
    fuzz::require(*p >= 0 && *p <= 1 && !std::signbit(*p), "a p-value outside [0, 1] or -0");
  } else {
    fuzz::check_message(p.error().message);
  }
  if (auto v = parse_number_text(text, "x")) {
    fuzz::require(std::isfinite(*v), "a number that is not finite");
    fuzz::require(!(*v == 0 && std::signbit(*v)), "a number of -0");
  } else {
    fuzz::check_message(v.error().message);
  }
  if (auto t = parse_time_text(text)) {
    fuzz::require(std::isfinite(*t), "a time that is not finite");
  } else {
    fuzz::check_message(t.error().message);
  }
  if (auto s = validate_test_id(text); !s) fuzz::check_message(s.error().message);
  const std::string e = excerpt(text, 40);
  fuzz::require(e.size() <= 40 * 4 + 32, "an excerpt longer than its bound");
  fuzz::require(excerpt(e, e.size()) == e, "an excerpt that is not printable UTF-8");
  return 0;
}
