// Summary columns of a log row -> p-value (docs/formats.md "Summary columns").
#include <charconv>
#include <cmath>
#include <string>

#include "alphaledger/stats.hpp"

namespace alphaledger {
namespace {

std::string trimmed(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  return std::string(s);
}

const std::string* find_present(const std::map<std::string, std::string>& fields, std::string_view name) {
  auto it = fields.find(std::string(name));
  if (it == fields.end() || trimmed(it->second).empty()) return nullptr;
  return &it->second;
}

bool parse_double(const std::string& t, double& v) {
  auto [end, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  return !t.empty() && ec == std::errc() && end == t.data() + t.size() && std::isfinite(v);
}

constexpr const char* kSummaryHelp =
    "give p_value, or summary columns: control_n, control_conversions, treatment_n, treatment_conversions "
    "(counts), or control_n, control_mean, control_sd, treatment_n, treatment_mean, treatment_sd (means)";

Result<const std::string*> require(const std::map<std::string, std::string>& fields, std::string_view name,
                                   std::string_view kind) {
  const std::string* v = find_present(fields, name);
  if (v == nullptr) {
    return invalid_input("missing " + std::string(name) + " (needed with " + std::string(kind) + "); " +
                         kSummaryHelp);
  }
  return v;
}

// A whole number of users or conversions. `at_least` only shapes the message; ranges are checked
// by compare_proportions / compare_means.
Result<std::uint64_t> whole_number(const std::map<std::string, std::string>& fields, std::string_view name,
                                   std::string_view kind, int at_least) {
  auto text = require(fields, name, kind);
  if (!text) return text.error();
  const std::string t = trimmed(**text);
  double v = 0;
  if (!parse_double(t, v) || v < 0 || v != std::floor(v) || v > 9007199254740992.0) {
    return invalid_input(std::string(name) + " must be a whole number >= " + std::to_string(at_least) +
                         ", got '" + t + "'");
  }
  return static_cast<std::uint64_t>(v);
}

Result<double> real_number(const std::map<std::string, std::string>& fields, std::string_view name,
                           std::string_view kind, std::string_view accepted) {
  auto text = require(fields, name, kind);
  if (!text) return text.error();
  const std::string t = trimmed(**text);
  double v = 0;
  if (!parse_double(t, v))
    return invalid_input(std::string(name) + " must be " + std::string(accepted) + ", got '" + t + "'");
  return v;
}

}  // namespace

Result<double> p_value_from_summary(const std::map<std::string, std::string>& fields,
                                    Alternative alternative) {
  const bool counts =
      find_present(fields, kControlConversionsColumn) || find_present(fields, kTreatmentConversionsColumn);
  const bool means = find_present(fields, kControlMeanColumn) || find_present(fields, kControlSdColumn) ||
                     find_present(fields, kTreatmentMeanColumn) || find_present(fields, kTreatmentSdColumn);
  if (counts && means) {
    return invalid_input(
        "the row gives both conversion counts and means; give one kind of summary per row "
        "(docs/formats.md, \"Summary columns\")");
  }
  if (counts) {
    constexpr std::string_view kKind = "conversion counts";
    auto n0 = whole_number(fields, kControlNColumn, kKind, 2);
    if (!n0) return n0.error();
    auto x0 = whole_number(fields, kControlConversionsColumn, kKind, 0);
    if (!x0) return x0.error();
    auto n1 = whole_number(fields, kTreatmentNColumn, kKind, 2);
    if (!n1) return n1.error();
    auto x1 = whole_number(fields, kTreatmentConversionsColumn, kKind, 0);
    if (!x1) return x1.error();
    auto c = compare_proportions({*n0, *x0}, {*n1, *x1}, ProportionMethod::kPooled, alternative);
    if (!c) return c.error();
    return c->p_value;
  }
  if (means) {
    constexpr std::string_view kKind = "means";
    auto n0 = whole_number(fields, kControlNColumn, kKind, 2);
    if (!n0) return n0.error();
    auto m0 = real_number(fields, kControlMeanColumn, kKind, "a finite number");
    if (!m0) return m0.error();
    auto s0 = real_number(fields, kControlSdColumn, kKind, "a finite number > 0");
    if (!s0) return s0.error();
    auto n1 = whole_number(fields, kTreatmentNColumn, kKind, 2);
    if (!n1) return n1.error();
    auto m1 = real_number(fields, kTreatmentMeanColumn, kKind, "a finite number");
    if (!m1) return m1.error();
    auto s1 = real_number(fields, kTreatmentSdColumn, kKind, "a finite number > 0");
    if (!s1) return s1.error();
    auto c = compare_means({*n0, *m0, *s0}, {*n1, *m1, *s1}, /*pooled_variance=*/false, alternative);
    if (!c) return c.error();
    return c->p_value;
  }
  return invalid_input(std::string("missing p_value; ") + kSummaryHelp);
}

}  // namespace alphaledger
