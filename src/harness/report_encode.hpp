// Compact, exact column forms for the data block of the HTML reports (docs/reports.md "The data
// block"). Internal to src/harness/report*.cpp; the page's script (report_assets.hpp: numbers(),
// integers(), flags(), texts()) and tests/cli/test_report_cli.cpp decode them.
//
// Every form gives back the very values it was made from: doubles bit for bit (binary64 written in
// base64, never rounded), integers and texts exactly. Each encoder picks the smallest of its forms
// (a plain JSON array is one of them), so short columns stay readable arrays.
//
//   numbers:  [..] | {"count": n, "same": v} | {"count": n, "f64": B64, "codes": RUNS, "before": w,
//             "divisor": d}. B64 holds the doubles that are written out, little-endian; RUNS says
//             for each row, in runs "<letter><count>" (count omitted for 1): x = the next written
//             double, r = the row before's value again, l = the row before's value minus
//             ref[row] / divisor (computed in binary64 as the page does, and used only where the
//             result is the identical double). The first row's "row before" is `before`. Without
//             "codes" every row is written out.
//   integers: [..] | {"count": n, "first": a, "every": d} | {"count": n, "first": a, "diffs": [..]}
//             | {"count": n, "first": a, "small_diffs": S, "large": [..]}: S has one base64 digit per
//             row after the first, its difference from the row before (0..62), or '/': the next
//             difference of "large".
//   flags:    [0/1..] | {"count": n, "set": [indices of the 1s]}
//   texts:    [..] | {"count": n, "front": F} | {"count": n, "values": [..], "index": I}.
//             F: per text two characters '0' + k and '0' + m, then m UTF-16 units: the text is the
//             first k units of the text before, then those m (k, m <= 74; a longer new part makes
//             the form unavailable). I: per row one base64 digit, the index into `values` (at most
//             64 values).
#pragma once

#include <cstdint>
#include <nlohmann/json.hpp>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace alphaledger::report_detail {

using Json = nlohmann::ordered_json;

std::string base64(std::string_view bytes);

// Non-finite values make the column a plain array with null in their place.
Json number_column(std::span<const double> values);
// As number_column, with "l" rows relative to `ref` (the levels of the same rows): wealth after each
// test when it is the wealth before minus the level divided by `divisor`.
Json number_column(std::span<const double> values, std::span<const double> ref, double before,
                   double divisor);
Json integer_column(std::span<const std::int64_t> values);
Json flag_column(const std::vector<bool>& values);
Json text_column(const std::vector<std::string>& values);

}  // namespace alphaledger::report_detail
