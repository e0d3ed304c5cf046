// alphaledger look STREAM --id ID --control C --treatment T [--mixture-sd TAU]
// alphaledger looks STREAM --id ID
// A look at a running (launched) test: the always-valid p-value from the cumulative summaries so
// far, its running minimum over the test's looks, and "stop" or "continue" against the level
// reserved at the launch; a stop decides the test (docs/ledger.md "Watching a running test").
// C and T are USERS:CONVERSIONS (proportions) or USERS:MEAN:SD (means), as `pvalue` takes them.
#include <cmath>
#include <iostream>
#include <vector>

#include "alphaledger/forms.hpp"
#include "alphaledger/text.hpp"
#include "cli/ledger_common.hpp"

namespace alphaledger::cli {
namespace {

struct LookOptions {
  std::string stream;
  std::string id;
  std::string control, treatment;
  std::optional<double> mixture_sd;
};

std::vector<std::string> colon_parts(const std::string& s) {
  std::vector<std::string> parts;
  std::size_t start = 0;
  while (true) {
    const std::size_t colon = s.find(':', start);
    parts.push_back(s.substr(start, colon == std::string::npos ? std::string::npos : colon - start));
    if (colon == std::string::npos) return parts;
    start = colon + 1;
  }
}

Result<std::uint64_t> whole_part(const std::string& text, const std::string& flag, const char* what) {
  const auto v = read_finite_number(text);
  if (!v || *v < 0 || *v != std::floor(*v) || *v > 9007199254740992.0) {
    return invalid_input(flag + ": " + what + " must be a whole number >= 0, got '" + excerpt(text) + "'");
  }
  return static_cast<std::uint64_t>(*v);
}

// One arm, USERS:CONVERSIONS or USERS:MEAN:SD, into `data` (control or treatment).
Status read_arm(const std::string& text, const std::string& flag, bool control, LookData& data) {
  const auto parts = colon_parts(text);
  if (parts.size() != 2 && parts.size() != 3) {
    return invalid_input(flag + " must be USERS:CONVERSIONS (proportions, e.g. 8000:400) or USERS:MEAN:SD " +
                         "(means, e.g. 500:12.5:4.2), cumulative so far; got '" + excerpt(text) + "'");
  }
  auto n = whole_part(parts[0], flag, "the number of users");
  if (!n) return n.error();
  if (parts.size() == 2) {
    auto x = whole_part(parts[1], flag, "the number of conversions");
    if (!x) return x.error();
    (control ? data.control_proportions : data.treatment_proportions) = ProportionArm{*n, *x};
    return {};
  }
  const auto mean = read_finite_number(parts[1]);
  if (!mean) return invalid_input(flag + ": the mean must be a finite number, got '" + excerpt(parts[1]) + "'");
  const auto sd = read_finite_number(parts[2]);
  if (!sd || *sd <= 0) {
    return invalid_input(flag + ": the standard deviation must be a finite number > 0, got '" +
                         excerpt(parts[2]) + "'");
  }
  (control ? data.control_means : data.treatment_means) = MeanArm{*n, *mean, *sd};
  return {};
}

Result<LookData> look_data(const LookOptions& o) {
  LookData data;
  const std::size_t c = colon_parts(o.control).size(), t = colon_parts(o.treatment).size();
  if (c != t && (c == 2 || c == 3) && (t == 2 || t == 3)) {
    return invalid_input("--control and --treatment must both be USERS:CONVERSIONS (proportions) or both " +
                         std::string("USERS:MEAN:SD (means)"));
  }
  data.summary = c == 3 ? LookSummary::kMeans : LookSummary::kProportions;
  if (auto s = read_arm(o.control, "--control", true, data); !s) return s.error();
  if (auto s = read_arm(o.treatment, "--treatment", false, data); !s) return s.error();
  if (o.mixture_sd && !(std::isfinite(*o.mixture_sd) && *o.mixture_sd > 0)) {
    return invalid_input("--mixture-sd must be a finite number > 0 (the effect you hope to detect, on the scale " +
                         std::string("of the estimate), got ") + format_number(*o.mixture_sd));
  }
  data.mixture_sd = o.mixture_sd;
  return data;
}

// Core and ledger messages name summary fields (control_n, control.n, ...): say which flag.
Error with_look_flag(Error e) {
  const std::string& m = e.message;
  const auto at = m.find(": ");
  const std::string tail = at == std::string::npos ? m : m.substr(at + 2);
  if (tail.rfind("control", 0) == 0) e.message = "--control: " + m;
  if (tail.rfind("treatment", 0) == 0) e.message = "--treatment: " + m;
  if (tail.rfind("mixture_sd", 0) == 0) e.message = "--mixture-sd: " + m;
  return e;
}

std::string look_text(const LookResult& l) {
  std::string t = "look " + std::to_string(l.look) + " at test " + l.id + " (stream " + l.stream + ", launch " +
                  std::to_string(l.launch) + ", step " + std::to_string(l.step) + ")\n";
  t += "  estimate         " + format_number(l.estimate) + "  (treatment minus control)\n";
  t += "  anytime_p_value  " + format_number(l.anytime_p_value) + "  (always valid, this look)\n";
  t += "  running_min      " + format_number(l.running_min) + "  (smallest over " + std::to_string(l.look) +
       (l.look == 1 ? " look)\n" : " looks)\n");
  t += "  e_value          " + format_number(l.e_value) + "\n";
  t += "  cs               [" + format_number(l.cs_low) + ", " + format_number(l.cs_high) +
       "]  (confidence sequence at 1 - the stream's alpha)\n";
  t += "  level            " + format_number(l.level) + "  (reserved at launch)\n";
  if (l.stop) {
    t += "stop: reject at the reserved level " + format_number(l.level) + "; test " + l.id + " is decided";
    if (l.decision) t += " at step " + std::to_string(l.decision->step);
  } else {
    t += "continue: not yet below the reserved level " + format_number(l.level) +
         "; look again as data arrive, or decide it when it ends";
  }
  if (l.repeat) t += "\n(repeat: the same data as look " + std::to_string(l.look) + "; nothing changed)";
  return t;
}

Status run_look(const LookOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (auto s = validate_test_id(o.id); !s) return invalid_input("--id: " + s.error().message);
  auto data = look_data(o);
  if (!data) return data.error();
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto l = (*ledger)->look(o.stream, o.id, *data);
  if (!l) return with_look_flag(l.error());
  // look() returned: the look (and a stop's decision) is synced. Only now is it printed.
  out << (g.json ? look_json(*l) : look_text(*l)) << '\n';
  out.flush();
  return {};
}

Status run_looks(const LookOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (auto s = validate_test_id(o.id); !s) return invalid_input("--id: " + s.error().message);
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  auto list = (*ledger)->looks(o.stream, o.id);
  if (!list) return list.error();
  if (g.json) {
    out << look_list_json(o.stream, o.id, *list) << '\n';
  } else {
    out << "look,step,looked_at,estimate,anytime_p_value,running_min,e_value,cs_low,cs_high,level,verdict\n";
    for (const auto& l : *list) {
      out << l.look << ',' << l.step << ',' << format_timestamp(l.looked_at_ms) << ',' << format_number(l.estimate)
          << ',' << format_number(l.anytime_p_value) << ',' << format_number(l.running_min) << ','
          << format_number(l.e_value) << ',' << format_number(l.cs_low) << ',' << format_number(l.cs_high) << ','
          << format_number(l.level) << ',' << (l.stop ? "stop" : "continue") << '\n';
    }
  }
  out.flush();
  return {};
}

}  // namespace

void add_look_commands(CLI::App& app, CommandContext& ctx) {
  {
    auto o = std::make_shared<LookOptions>();
    CLI::App* sub = app.add_subcommand(
        "look",
        "look at a running (launched) test: the always-valid p-value from the cumulative summaries so far; "
        "stop (and decide it) once the running minimum reaches the reserved level, else continue");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->add_option("--id", o->id, "the running test's id")->required();
    sub->add_option("--control", o->control,
                    "the control arm so far: USERS:CONVERSIONS, or USERS:MEAN:SD for a numeric metric")
        ->required();
    sub->add_option("--treatment", o->treatment, "the treatment arm so far, in the same form")->required();
    sub->add_option("--mixture-sd", o->mixture_sd,
                    "the mixing scale, about the effect you hope to detect, on the scale of the estimate; "
                    "needed at a test's first look, kept for its later looks");
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_look(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<LookOptions>();
    CLI::App* sub = app.add_subcommand("looks", "list the looks at one test, oldest first (CSV, or --json)");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->add_option("--id", o->id, "the test's id")->required();
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_looks(*o, ctx.global, std::cout); }; });
  }
}

}  // namespace alphaledger::cli
