#include "alphaledger/replay.hpp"

#include <algorithm>
#include <array>
#include <set>

#include "alphaledger/offline.hpp"

namespace alphaledger {

Result<std::vector<std::string>> split_rule_list(std::string_view list) {
  std::vector<std::string> out;
  std::set<std::string> seen;
  std::size_t start = 0;
  while (start <= list.size()) {
    const std::size_t comma = std::min(list.find(',', start), list.size());
    std::string name(list.substr(start, comma - start));
    if (name.empty()) return invalid_input("--rules has an empty name in '" + std::string(list) + "'");
    if (!seen.insert(name).second) return invalid_input("--rules names '" + name + "' twice");
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
    if (name == "bh" || name == "storey-bh") {
      if (!allow_offline) {
        return invalid_input("'" + name +
                             "' needs the whole log at once; it is available in replay and simulate only");
      }
      OfflineConfig oc;
      oc.method = name == "bh" ? OfflineMethod::kBh : OfflineMethod::kStoreyBh;
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
                           "'; accepted: alpha-spending, alpha-investing, lond, lord++, saffron, addis" +
                           std::string(allow_offline ? ", bh, storey-bh" : ""));
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
      std::string flag(given[i].first);
      std::replace(flag.begin(), flag.end(), '_', '-');
      return invalid_input("--" + flag + " is not taken by any listed rule");
    }
  }
  return out;
}

namespace {

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
    const auto o = rule.finish(launch_of[k], p_value(k));
    // Cannot fail: the launch is running and the reader checked p in [0, 1].
    const Outcome out = o ? *o : Outcome{launch_of[k], 0, false, 0};
    each(k, Decision{k + 1, out.level, out.rejected, out.wealth, launch_of[k]});
  }
}

}  // namespace

ReplayResult replay(const TestLog& log, const std::vector<Procedure>& procedures) {
  ReplayResult result;
  result.procedures = procedures;
  std::vector<double> p;
  p.reserve(log.records.size());
  for (const auto& r : log.records) p.push_back(r.p_value);
  for (const auto& proc : procedures) {
    std::vector<Decision> ds;
    ds.reserve(p.size());
    if (const auto* rc = std::get_if<RuleConfig>(&proc.config); rc && log.has_launch) {
      const auto& rs = log.records;
      decide_with_launches(
          rs.size(), *rc, [&](std::size_t i) { return rs[i].launched_at.value_or(0); },
          [&](std::size_t i) { return rs[i].finished_at.value_or(0); }, [&](std::size_t i) { return rs[i].line; },
          [&](std::size_t i) { return rs[i].p_value; },
          [&](std::size_t, const Decision& d) { ds.push_back(d); });
    } else if (rc) {
      Rule rule(*rc);
      for (double x : p) {
        const Outcome o = rule.record(x);
        ds.push_back({o.step, o.level, o.rejected, o.wealth});
      }
    } else {
      const auto& oc = std::get<OfflineConfig>(proc.config);
      const OfflineDecisions od = oc.method == OfflineMethod::kBh
                                      ? benjamini_hochberg(p, oc.alpha)
                                      : storey_bh(p, oc.alpha, oc.candidate_threshold);
      for (std::size_t i = 0; i < p.size(); ++i)
        ds.push_back({i + 1, od.threshold, od.rejected[i], std::nullopt});
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
  if (rc && log.has_launch) {
    const auto& rs = log.records;
    decide_with_launches(
        rs.size(), *rc, [&](std::size_t i) { return rs[i].launched_at; },
        [&](std::size_t i) { return rs[i].finished_at; }, [&](std::size_t i) { return rs[i].line; },
        [&](std::size_t i) { return rs[i].p_value; }, each);
    return;
  }
  if (rc) {
    Rule rule(*rc);
    for (std::size_t i = 0; i < log.size(); ++i) {
      const Outcome o = rule.record(log.records[i].p_value);
      each(i, Decision{o.step, o.level, o.rejected, o.wealth});
    }
    return;
  }
  std::vector<double> p;
  p.reserve(log.size());
  for (const auto& r : log.records) p.push_back(r.p_value);
  const auto& oc = std::get<OfflineConfig>(procedure.config);
  const OfflineDecisions od = oc.method == OfflineMethod::kBh
                                  ? benjamini_hochberg(p, oc.alpha)
                                  : storey_bh(p, oc.alpha, oc.candidate_threshold);
  p = {};
  for (std::size_t i = 0; i < log.size(); ++i)
    each(i, Decision{i + 1, od.threshold, od.rejected[i], std::nullopt});
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
