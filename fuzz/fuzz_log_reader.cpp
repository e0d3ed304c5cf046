// The log reader (CSV and JSON Lines, docs/formats.md) on any bytes: never crashes, refuses with
// a bounded message, and every record it accepts satisfies the documented rules.
#include <cmath>
#include <sstream>

#include "fuzz_support.hpp"

using namespace alphaledger;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  // The first byte picks the format and options, the rest is the file.
  const std::uint8_t mode = data[0];
  const std::string text(fuzz::as_text(data + 1, size - 1));
  std::istringstream in(text);
  ReadOptions options;
  options.allow_duplicate_ids = (mode & 2) != 0;
  options.order_by_finished_at = (mode & 4) != 0;
  options.alternative = (mode & 8) != 0 ? Alternative::kGreater : Alternative::kTwoSided;
  const LogFormat format = (mode & 1) != 0 ? LogFormat::kJsonLines : LogFormat::kCsv;
  auto log = read_test_log(in, "fuzz", format, options);
  if (!log) {
    fuzz::check_message(log.error().message);
    return 0;
  }
  for (const auto& r : log->records) {
    fuzz::require(validate_test_id(r.id).ok(), "an accepted id that validate_test_id refuses");
    fuzz::require(r.p_value >= 0 && r.p_value <= 1, "an accepted p-value outside [0, 1]");
    fuzz::require(!std::signbit(r.p_value), "an accepted p-value of -0");
    if (r.finished_at) fuzz::require(std::isfinite(*r.finished_at), "a finished_at that is not finite");
  }
  return 0;
}
