// Small pieces shared by the statistics commands (pvalue in src/cli/cmd_pvalue.cpp, plan in
// src/cli/cmd_plan.cpp): number text for people and JSON, aligned text blocks, the --alternative
// flag. Project-internal.
#pragma once

#include <CLI/CLI.hpp>
#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>
#include <optional>
#include <ostream>
#include <string>
#include <utility>
#include <vector>

#include "alphaledger/text.hpp"
#include "cli/command.hpp"

namespace alphaledger::cli {

using Json = nlohmann::ordered_json;

// A JSON number, or null for a missing or infinite value (JSON has no infinity).
inline Json json_number(std::optional<double> v) {
  if (!v || !std::isfinite(*v)) return nullptr;
  return *v;
}

// Text for people: 4 significant digits, "-inf"/"inf" for open interval ends, "-" when missing.
inline std::string text_number(std::optional<double> v, int digits = 4) {
  if (!v) return "-";
  if (std::isinf(*v)) return *v > 0 ? "inf" : "-inf";
  return format_rounded(*v, digits);
}

// Aligned "label  value" lines; labels are the JSON keys (docs/cli.md).
class TextBlock {
 public:
  void add(std::string label, std::string value) { lines_.emplace_back(std::move(label), std::move(value)); }
  void print(std::ostream& out) const {
    std::size_t width = 0;
    for (const auto& [label, value] : lines_) width = std::max(width, label.size());
    for (const auto& [label, value] : lines_)
      out << label << std::string(width + 2 - label.size(), ' ') << value << '\n';
  }

 private:
  std::vector<std::pair<std::string, std::string>> lines_;
};

inline bool parse_real(const std::string& t, double& v) {
  const auto r = read_finite_number(t);
  if (r) v = *r;
  return r.has_value();
}

// --alternative, shared by the pvalue and plan subcommands.
inline void add_alternative(CLI::App* sub, std::string& alternative) {
  sub->add_option("--alternative", alternative,
                  "two-sided, greater (the treatment is larger) or less; default two-sided")
      ->check(CLI::IsMember({"two-sided", "greater", "less"}));
}

// `plan proportions` and `plan means` (src/cli/cmd_plan.cpp).
void add_plan_commands(CLI::App& app, CommandContext& ctx);

}  // namespace alphaledger::cli
