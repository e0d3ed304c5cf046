// The frame every HTML report page shares (src/harness/report_pages.cpp): the page around a
// report's own sections, figures, fact tables, the conditions of a rule, and the data block's small
// forms. Internal to the harness; each page kind is in its own file (report_stream_page.cpp,
// report_replay_page.cpp, report_simulation_page.cpp).
#pragma once

#include <cmath>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <type_traits>
#include <utility>
#include <vector>

#include "alphaledger/rules.hpp"
#include "harness/report_encode.hpp"

namespace alphaledger::report_detail {

// The layout of the data block: 2 writes columns in the compact forms of report_encode.hpp.
inline constexpr int kDataFormat = 2;

inline Json number_or_null(double v) { return std::isfinite(v) ? Json(v) : Json(nullptr); }
template <typename T>
Json optional_json(const std::optional<T>& v) {
  if (!v) return Json(nullptr);
  if constexpr (std::is_floating_point_v<T>) return number_or_null(*v);
  return Json(*v);
}

// ISO 8601 UTC with milliseconds, as the ledger prints decided_at; "-" for no time.
std::string timestamp_text(std::int64_t ms);

// The page around a report's own sections: `kind` is "stream", "replay" or "simulation" (it picks
// the drawing script), `body` the sections, `data` the report's numbers.
std::string page(std::string_view kind, const std::string& title, const std::string& subtitle,
                 const std::string& body, const Json& data);

// A chart: heading, an accessible label for the canvas, and a caption under it.
std::string figure(const std::string& id, const std::string& heading, const std::string& label,
                   const std::string& caption);

// A two-column table of facts (name, value).
std::string definition_rows(const std::vector<std::pair<std::string, std::string>>& rows);

// The conditions under which a rule's guarantee holds, in words.
std::string conditions_text(const RuleConfig& c);

}  // namespace alphaledger::report_detail
