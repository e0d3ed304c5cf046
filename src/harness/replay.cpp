#include "alphaledger/replay.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <set>

#include "alphaledger/offline.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {

Result<std::vector<std::string>> split_rule_list(std::string_view list) {
  std::vector<std::string> out;
  std::set<std::string> seen;
  std::size_t start = 0;
  while (start <= list.size()) {
    const std::size_t comma = std::min(list.find(',', start), list.size());
    std::string name(list.substr(start, comma - start));
    if (name.empty()) return invalid_input("the list of rules has an empty name in '" + excerpt(list) + "'");
    if (!seen.insert(name).second) return invalid_input("the list of rules names '" + excerpt(name) + "' twice");
    out.push_back(name);
    start = comma + 1;
  }
  return out;
}

Result<std::vector<Procedure>> resolve_procedures(const std::vector<std::string>& names,
                                                  const RuleSpec& flags, bool allow_offline) {
  std::vector<Procedure> out;
  const std::array<std::pair<std::string_view, bool>, 6> given = {{
      {"initial_wealth", flags.initial_wealth.has_value()},
      {"candidate_threshold", flags.candidate_threshold.has_value()},
      {"discard_threshold", flags.discard_threshold.has_value()},
      {"payout", flags.payout.has_value()},
      {"spending", flags.spending.has_value()},
      {"evaluation", flags.evaluation.has_value()},
  }};
  std::array<bool, 6> used{};
  for (const auto& name : names) {
    if (name == "bh" || name == "storey-bh" || name == "e-bh") {
      if (!allow_offline) {
        return invalid_input("'" + name +
                             "' needs the whole log at once; it is available in replay and simulate only");
      }
      OfflineConfig oc;
      oc.method = name == "bh" ? OfflineMethod::kBh : (name == "e-bh" ? OfflineMethod::kEBh : OfflineMethod::kStoreyBh);
      oc.alpha = flags.alpha.value_or(0.05);
      if (!(oc.alpha > 0 && oc.alpha < 1)) {
        return invalid_input("alpha must satisfy 0 < alpha < 1, got " + std::to_string(oc.alpha));
      }
      if (oc.method == OfflineMethod::kStoreyBh) {
        used[1] = true;
        oc.candidate_threshold = flags.candidate_threshold.value_or(0.5);
        if (!(oc.candidate_threshold > 0 && oc.candidate_threshold < 1)) {
          return invalid_input("candidate_threshold must satisfy 0 < lambda < 1 for storey-bh");
        }
      }
      out.push_back({name, oc});
      continue;
    }
    auto kind = parse_rule_name(name);
    if (!kind) {
      return invalid_input("unknown rule '" + name +
                           "'; accepted: alpha-spending, alpha-investing, lond, lord++, saffron, addis, e-lond" +
                           std::string(allow_offline ? ", bh, storey-bh, e-bh" : ""));
    }
    RuleSpec spec;
    spec.rule = name;
    spec.alpha = flags.alpha;
    for (std::size_t i = 0; i < given.size(); ++i) {
      if (!given[i].second || !rule_takes(*kind, given[i].first)) continue;
      used[i] = true;
      switch (i) {
        case 0:
          spec.initial_wealth = flags.initial_wealth;
          break;
        case 1:
          spec.candidate_threshold = flags.candidate_threshold;
          break;
        case 2:
          spec.discard_threshold = flags.discard_threshold;
          break;
        case 3:
          spec.payout = flags.payout;
          break;
        case 4:
          spec.spending = flags.spending;
          break;
        case 5:
          spec.evaluation = flags.evaluation;
          break;
      }
    }
    auto config = resolve_config(spec);
    if (!config) return config.error();
    out.push_back({name, *config});
  }
  for (std::size_t i = 0; i < given.size(); ++i) {
    if (given[i].second && !used[i]) {
      return invalid_field(std::string(given[i].first), "is not taken by any listed rule");
    }
  }
  return out;
}

bool Procedure::takes_e_values() const {
  if (const auto* rc = std::get_if<RuleConfig>(&config)) return rule_takes_e_values(rc->kind);
  return std::get<OfflineConfig>(config).method == OfflineMethod::kEBh;
}

std::string_view guarantee_of(const Procedure& procedure) {
  if (const auto* rc = std::get_if<RuleConfig>(&procedure.config)) {
    switch (rc->kind) {
      case RuleKind::kAlphaSpending:
        return "FWER";
      case RuleKind::kAlphaInvesting:
        return "mFDR";
      default:
        return "FDR";
    }
  }
  return "FDR";  // bh, storey-bh, e-bh
}

Status check_log_columns(const CompactLog& log, const std::vector<Procedure>& procedures) {
  for (const auto& proc : procedures) {
    const bool e = proc.takes_e_values();
    if (e && !log.has_e_values) {
      return invalid_input(log.source + ": rule " + proc.name +
                           " reads e-values, and the log has no e_value column; add one (a number >= 0 "
                           "per test) or choose a rule that reads p-values");
    }
    if (!e && !log.has_p_values) {
      return invalid_input(log.source + ": rule " + proc.name +
                           " reads p-values, and the log has no p_value column (only e_value); add "
                           "p_value or choose a rule that reads e-values (e-lond, e-bh)");
    }
  }
  return {};
}

namespace {

// The decisions of an offline baseline on the whole log at once.
OfflineDecisions decide_offline(const OfflineConfig& oc, const std::vector<double>& x) {
  switch (oc.method) {
    case OfflineMethod::kBh:
      return benjamini_hochberg(x, oc.alpha);
    case OfflineMethod::kStoreyBh:
      return storey_bh(x, oc.alpha, oc.candidate_threshold);
    case OfflineMethod::kEBh:
      return e_benjamini_hochberg(x, oc.alpha);
  }
  return {};
}

// The level column of an offline baseline: its p-value threshold, or for e-bh 1 / its e-value
// threshold (0 when it rejects nothing).
double offline_level(const OfflineConfig& oc, const OfflineDecisions& od) {
  if (oc.method != OfflineMethod::kEBh) return od.threshold;
  return std::isfinite(od.threshold) && od.threshold > 0 ? 1 / od.threshold : 0.0;
}

// Decides a log with launch times through the rule's launch/finish events (docs/formats.md,
// "Launch times"): launches in order of (launched_at, line), finishes in log order (the order of
// finished_at); at equal times the finishes come first, except that a test is never finished before
// its own launch (a test launched and finished at the same moment waits for the launches before it
// in file order). Decisions are handed out in log order, with the step being the position in the
// log and `launch` the launch number. Memory: two numbers a row beside the rule's running tests.
template <typename Launched, typename Finished, typename Line, typename PValue>
void decide_with_launches(std::size_t n, const RuleConfig& config, Launched launched_at, Finished finished_at,
                          Line line, PValue p_value,
                          const std::function<void(std::size_t, const Decision&)>& each) {
  std::vector<std::size_t> order(n);
  for (std::size_t i = 0; i < n; ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
    const double ta = launched_at(a), tb = launched_at(b);
    return ta != tb ? ta < tb : line(a) < line(b);
  });
  std::vector<std::uint64_t> launch_of(n, 0);  // 0: not launched yet
  Rule rule(config);
  std::size_t next_launch = 0;
  for (std::size_t k = 0; k < n; ++k) {
    // Every launch strictly earlier than this finish, then (at an equal time) only those needed
    // to launch this test itself.
    while (next_launch < n &&
           (launched_at(order[next_launch]) < finished_at(k) || launch_of[k] == 0)) {
      launch_of[order[next_launch]] = rule.launch().launch;
      ++next_launch;
    }
    const auto o = rule_takes_e_values(config.kind) ? rule.finish_e(launch_of[k], p_value(k))
                                                    : rule.finish(launch_of[k], p_value(k));
    // Cannot fail: the launch is running and the reader checked p in [0, 1].
    const Outcome out = o ? *o : Outcome{launch_of[k], 0, false, 0};
    each(k, Decision{k + 1, out.level, out.rejected, out.wealth, launch_of[k]});
  }
}

}  // namespace

ReplayResult replay(const TestLog& log, const std::vector<Procedure>& procedures) {
  ReplayResult result;
  result.procedures = procedures;
  std::vector<double> p, e;
  p.reserve(log.records.size());
  for (const auto& r : log.records) p.push_back(r.p_value);
  for (const auto& r : log.records) e.push_back(r.e_value.value_or(0));
  for (const auto& proc : procedures) {
    const std::vector<double>& x = proc.takes_e_values() ? e : p;
    std::vector<Decision> ds;
    ds.reserve(p.size());
    if (const auto* rc = std::get_if<RuleConfig>(&proc.config); rc && log.has_launch) {
      const auto& rs = log.records;
      decide_with_launches(
          rs.size(), *rc, [&](std::size_t i) { return rs[i].launched_at.value_or(0); },
          [&](std::size_t i) { return rs[i].finished_at.value_or(0); }, [&](std::size_t i) { return rs[i].line; },
          [&](std::size_t i) { return x[i]; }, [&](std::size_t, const Decision& d) { ds.push_back(d); });
    } else if (rc) {
      Rule rule(*rc);
      for (double v : x) {
        const Outcome o = rule.record(v);  // record() reads an e-value for e-lond
        ds.push_back({o.step, o.level, o.rejected, o.wealth});
      }
    } else {
      const auto& oc = std::get<OfflineConfig>(proc.config);
      const OfflineDecisions od = decide_offline(oc, x);
      const double level = offline_level(oc, od);
      for (std::size_t i = 0; i < x.size(); ++i) ds.push_back({i + 1, level, od.rejected[i], std::nullopt});
    }
    result.decisions.push_back(std::move(ds));
  }
  return result;
}

std::vector<ReplaySummary> summarize(const ReplayResult& result, const TestLog& log) {
  std::vector<ReplaySummary> out;
  std::uint64_t nonnull = 0;
  for (const auto& r : log.records) nonnull += (r.is_null && !*r.is_null) ? 1 : 0;
  for (std::size_t i = 0; i < result.procedures.size(); ++i) {
    ReplaySummary s;
    s.rule = result.procedures[i].name;
    s.tests = result.decisions[i].size();
    std::uint64_t v = 0, true_disc = 0;
    for (std::size_t k = 0; k < result.decisions[i].size(); ++k) {
      if (!result.decisions[i][k].rejected) continue;
      ++s.rejections;
      if (log.has_truth) (*log.records[k].is_null ? v : true_disc) += 1;
    }
    if (log.has_truth) {
      s.false_discoveries = v;
      s.fdp = static_cast<double>(v) / static_cast<double>(std::max<std::uint64_t>(s.rejections, 1));
      if (nonnull > 0) s.power = static_cast<double>(true_disc) / static_cast<double>(nonnull);
    }
    out.push_back(std::move(s));
  }
  return out;
}

void replay_each(const CompactLog& log, const Procedure& procedure,
                 const std::function<void(std::size_t, const Decision&)>& each) {
  const auto* rc = std::get_if<RuleConfig>(&procedure.config);
  const bool e = procedure.takes_e_values();
  const auto value = [&](std::size_t i) { return e ? log.records[i].e_value : log.records[i].p_value; };
  if (rc && log.has_launch) {
    const auto& rs = log.records;
    decide_with_launches(
        rs.size(), *rc, [&](std::size_t i) { return rs[i].launched_at; },
        [&](std::size_t i) { return rs[i].finished_at; }, [&](std::size_t i) { return rs[i].line; }, value,
        each);
    return;
  }
  if (rc) {
    Rule rule(*rc);
    for (std::size_t i = 0; i < log.size(); ++i) {
      const Outcome o = rule.record(value(i));  // record() reads an e-value for e-lond
      each(i, Decision{o.step, o.level, o.rejected, o.wealth});
    }
    return;
  }
  std::vector<double> x;
  x.reserve(log.size());
  for (std::size_t i = 0; i < log.size(); ++i) x.push_back(value(i));
  const auto& oc = std::get<OfflineConfig>(procedure.config);
  const OfflineDecisions od = decide_offline(oc, x);
  x = {};
  const double level = offline_level(oc, od);
  for (std::size_t i = 0; i < log.size(); ++i) each(i, Decision{i + 1, level, od.rejected[i], std::nullopt});
}

std::vector<ReplaySummary> summarize(const CompactLog& log, const std::vector<Procedure>& procedures) {
  std::vector<ReplaySummary> out;
  const auto is_null = [&](std::size_t k) { return (log.records[k].flags & CompactRecord::kIsNull) != 0; };
  std::uint64_t nonnull = 0;
  for (const auto& r : log.records) {
    nonnull += (r.flags & CompactRecord::kHasTruth) != 0 && (r.flags & CompactRecord::kIsNull) == 0 ? 1 : 0;
  }
  for (const auto& proc : procedures) {
    ReplaySummary s;
    s.rule = proc.name;
    std::uint64_t v = 0, true_disc = 0;
    replay_each(log, proc, [&](std::size_t k, const Decision& d) {
      ++s.tests;
      if (!d.rejected) return;
      ++s.rejections;
      if (log.has_truth) (is_null(k) ? v : true_disc) += 1;
    });
    if (log.has_truth) {
      s.false_discoveries = v;
      s.fdp = static_cast<double>(v) / static_cast<double>(std::max<std::uint64_t>(s.rejections, 1));
      if (nonnull > 0) s.power = static_cast<double>(true_disc) / static_cast<double>(nonnull);
    }
    out.push_back(std::move(s));
  }
  return out;
}

}  // namespace alphaledger
