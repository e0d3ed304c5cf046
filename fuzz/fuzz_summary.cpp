// Summary rows (docs/formats.md, "Summary columns"): any texts in the eight columns and p_value.
// Lines of the input fill the columns in a fixed order; the first byte picks the direction.
#include <cmath>
#include <map>

#include "alphaledger/stats.hpp"
#include "fuzz_support.hpp"

using namespace alphaledger;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  static const char* kColumns[] = {
      "control_n",    "control_conversions", "treatment_n",    "treatment_conversions",
      "control_mean", "control_sd",          "treatment_mean", "treatment_sd",
      "p_value"};
  const Alternative direction = data[0] % 3 == 0   ? Alternative::kTwoSided
                                : data[0] % 3 == 1 ? Alternative::kGreater
                                                   : Alternative::kLess;
  std::string_view rest = fuzz::as_text(data + 1, size - 1);
  std::map<std::string, std::string> fields;
  for (const char* column : kColumns) {
    const std::size_t nl = rest.find('\n');
    fields[column] = std::string(rest.substr(0, nl));
    if (nl == std::string_view::npos) break;
    rest.remove_prefix(nl + 1);
  }
  auto p = p_value_from_fields(fields, direction);
  if (!p) {
    fuzz::check_message(p.error().message);
    return 0;
  }
  fuzz::require(*p >= 0 && *p <= 1 && !std::isnan(*p), "a summary p-value outside [0, 1]");
  return 0;
}
