// Simulation plans, each row's decisions on a simulated stream, and the metrics over runs
// (include/alphaledger/simulate.hpp, docs/simulate.md). Numbers in, numbers out: no I/O, no logging, no
// clock, no globals.
#include "alphaledger/simulate.hpp"

#include <algorithm>
#include <bit>
#include <charconv>
#include <cmath>
#include <limits>

#include "alphaledger/anytime.hpp"
#include "alphaledger/offline.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {
namespace {

double sample_se(double sum, double sum_sq, double n) {
  if (n < 2) return std::numeric_limits<double>::quiet_NaN();
  const double mean = sum / n;
  const double ss = std::max(0.0, sum_sq - n * mean * mean);
  return std::sqrt(ss / (n - 1) / n);
}

}  // namespace

// ---------------------------------------------------------------------------------------------

RunTally tally_decisions(const SimulatedStream& stream, const std::vector<bool>& rejected) {
  RunTally t;
  t.nonnulls = stream.nonnulls;
  for (std::size_t i = 0; i < rejected.size(); ++i) {
    if (!rejected[i]) continue;
    ++t.rejections;
    t.false_discoveries += stream.is_null[i];
  }
  return t;
}

std::string_view evidence_suffix(Evidence evidence) {
  switch (evidence) {
    case Evidence::kFinal:
      return "";
    case Evidence::kPeekFixed:
      return ":peek-fixed";
    case Evidence::kPeekAnytime:
      return ":peek-anytime";
    case Evidence::kPeekMixture:
      return ":peek-mixture";
  }
  return "";
}

SimulationPlan::SimulationPlan(std::vector<Procedure> procedures, PeekingSpec peeking) : peeking_(peeking) {
  for (const auto& p : procedures) {
    std::vector<Evidence> kinds = {Evidence::kFinal};
    if (const auto* rc = std::get_if<RuleConfig>(&p.config); rc && peeking.looks > 0) {
      if (rule_takes_e_values(rc->kind)) {
        kinds.push_back(Evidence::kPeekMixture);
      } else {
        kinds.push_back(Evidence::kPeekFixed);
        kinds.push_back(Evidence::kPeekAnytime);
      }
    }
    for (Evidence kind : kinds) {
      Procedure row = p;
      row.name += evidence_suffix(kind);
      rows_.push_back(std::move(row));
      evidence_.push_back(kind);
      if (const auto* rc = std::get_if<RuleConfig>(&p.config)) {
        prototypes_.emplace_back(Rule(*rc));
      } else {
        prototypes_.emplace_back(std::nullopt);
      }
    }
  }
}

StreamNeeds SimulationPlan::needs() const {
  StreamNeeds n;
  n.peeking = peeking_;
  for (const auto& p : rows_) {
    if (const auto* rc = std::get_if<RuleConfig>(&p.config)) {
      n.e_values = n.e_values || rule_takes_e_values(rc->kind);
    } else if (std::get<OfflineConfig>(p.config).method == OfflineMethod::kEBh) {
      n.e_values = true;
    }
  }
  return n;
}

namespace {

// The order in which running tests finish: tests grouped by the launch they finish before (n: at
// the end), in launch order within a group (a stable counting sort). first[k]..first[k+1] index
// `order` for the tests that finish just before launch k.
struct FinishSchedule {
  std::vector<std::uint64_t> first;
  std::vector<std::uint64_t> order;

  explicit FinishSchedule(const std::vector<std::uint64_t>& finish_before) {
    const std::size_t n = finish_before.size();
    first.assign(n + 2, 0);
    for (auto f : finish_before) ++first[f + 1];
    for (std::size_t k = 1; k < first.size(); ++k) first[k] += first[k - 1];
    order.resize(n);
    std::vector<std::uint64_t> next(first.begin(), first.end() - 1);
    for (std::size_t t = 0; t < n; ++t) order[next[finish_before[t]]++] = t;
  }
};

// The evidence test t reports when it finishes, given the level reserved at its launch. A test
// that stops early reports the evidence that stopped it; any value at or past the level gives the
// same decision and the same state, so the extreme over the looks stands for it.
double reported_evidence(const SimulatedStream& s, Evidence evidence, bool takes_e, std::size_t t,
                         double level) {
  switch (evidence) {
    case Evidence::kFinal:
      return takes_e ? s.e_value[t] : s.p_value[t];
    case Evidence::kPeekFixed:  // stop at the first look with p <= level, else run to the end
      return s.p_min_fixed[t] <= level ? s.p_min_fixed[t] : s.p_value[t];
    case Evidence::kPeekAnytime:  // the running minimum, whether the test stopped early or not
      return s.p_min_anytime[t];
    case Evidence::kPeekMixture:  // stop when the ratio reaches 1 / level, else its value at the end
      return s.e_max_mixture[t] >= 1.0 / level ? s.e_max_mixture[t] : s.e_last_mixture[t];
  }
  return s.p_value[t];
}

RunTally decide_by_events(Rule rule, const SimulatedStream& s, Evidence evidence,
                          const FinishSchedule& schedule) {
  RunTally tally;
  tally.nonnulls = s.nonnulls;
  const bool takes_e = rule_takes_e_values(rule.config().kind);
  const std::size_t n = s.p_value.size();
  std::vector<Reservation> reserved(n);
  const auto finish = [&](std::size_t t) {
    const double x = reported_evidence(s, evidence, takes_e, t, reserved[t].level);
    auto o = takes_e ? rule.finish_e(reserved[t].launch, x) : rule.finish(reserved[t].launch, x);
    if (o.ok() && o->rejected) {
      ++tally.rejections;
      tally.false_discoveries += s.is_null[t];
    }
  };
  for (std::size_t k = 0; k <= n; ++k) {
    for (std::uint64_t i = schedule.first[k]; i < schedule.first[k + 1]; ++i) finish(schedule.order[i]);
    if (k < n) reserved[k] = rule.launch();
  }
  return tally;
}

}  // namespace

std::vector<RunTally> SimulationPlan::decide(const SimulatedStream& stream) const {
  std::vector<RunTally> out;
  out.reserve(rows_.size());
  const std::size_t n = stream.p_value.size();
  std::optional<FinishSchedule> schedule;
  for (std::size_t i = 0; i < rows_.size(); ++i) {
    RunTally t;
    t.nonnulls = stream.nonnulls;
    if (prototypes_[i]) {
      const bool takes_e = rule_takes_e_values(prototypes_[i]->config().kind);
      if (evidence_[i] == Evidence::kFinal && stream.finish_before.empty()) {
        Rule rule = *prototypes_[i];  // synchronous: record(), today's rules exactly
        for (std::size_t k = 0; k < n; ++k) {
          const bool rejected =
              takes_e ? rule.record_e(stream.e_value[k]).rejected : rule.record(stream.p_value[k]).rejected;
          if (rejected) {
            ++t.rejections;
            t.false_discoveries += stream.is_null[k];
          }
        }
      } else {
        if (!schedule) {
          if (stream.finish_before.empty()) {
            std::vector<std::uint64_t> next(n);
            for (std::size_t k = 0; k < n; ++k) next[k] = k + 1;
            schedule.emplace(next);
          } else {
            schedule.emplace(stream.finish_before);
          }
        }
        t = decide_by_events(*prototypes_[i], stream, evidence_[i], *schedule);
      }
    } else {
      const auto& oc = std::get<OfflineConfig>(rows_[i].config);
      const OfflineDecisions od =
          oc.method == OfflineMethod::kEBh  ? e_benjamini_hochberg(stream.e_value, oc.alpha)
          : oc.method == OfflineMethod::kBh ? benjamini_hochberg(stream.p_value, oc.alpha)
                                            : storey_bh(stream.p_value, oc.alpha, oc.candidate_threshold);
      t = tally_decisions(stream, od.rejected);
    }
    out.push_back(t);
  }
  return out;
}

std::vector<RunTally> simulate_run(const SimulationPlan& plan, const SimulationModel& model,
                                   std::uint64_t seed, std::uint64_t run) {
  return plan.decide(generate_stream(model, seed, run, plan.needs()));
}

// ---------------------------------------------------------------------------------------------

void MetricTotals::add(const RunTally& r) {
  const double rv = static_cast<double>(r.rejections);
  const double vv = static_cast<double>(r.false_discoveries);
  const double r1v = std::max(rv, 1.0);
  const double fdp_run = vv / r1v;
  ++runs;
  rejections += rv;
  fdp += fdp_run;
  fdp_sq += fdp_run * fdp_run;
  v += vv;
  v_sq += vv * vv;
  r1 += r1v;
  r1_sq += r1v * r1v;
  v_r1 += vv * r1v;
  r_sq += rv * rv;
  v_r += vv * rv;
  any_false += r.false_discoveries >= 1 ? 1 : 0;
  if (r.nonnulls > 0) {
    const double pw = (rv - vv) / static_cast<double>(r.nonnulls);
    ++power_runs;
    power += pw;
    power_sq += pw * pw;
  }
}

void MetricTotals::merge(const MetricTotals& o) {
  runs += o.runs;
  rejections += o.rejections;
  fdp += o.fdp;
  fdp_sq += o.fdp_sq;
  v += o.v;
  v_sq += o.v_sq;
  r1 += o.r1;
  r1_sq += o.r1_sq;
  v_r1 += o.v_r1;
  r_sq += o.r_sq;
  v_r += o.v_r;
  any_false += o.any_false;
  power_runs += o.power_runs;
  power += o.power;
  power_sq += o.power_sq;
}

std::string_view error_metric_name(ErrorMetric metric) {
  switch (metric) {
    case ErrorMetric::kFdr:
      return "FDR";
    case ErrorMetric::kMfdrEta:
      return "mFDR_eta";
    case ErrorMetric::kFwer:
      return "FWER";
  }
  return "FDR";
}

ErrorMetric promised_metric(const Procedure& procedure) {
  if (const auto* rc = std::get_if<RuleConfig>(&procedure.config)) {
    if (rc->kind == RuleKind::kAlphaSpending) return ErrorMetric::kFwer;
    if (rc->kind == RuleKind::kAlphaInvesting) return ErrorMetric::kMfdrEta;
  }
  return ErrorMetric::kFdr;
}

bool exceeds_by_three_se(double estimate, double se, double target) {
  if (std::isnan(se) || std::isnan(estimate)) return false;
  return estimate > target + 3.0 * se;
}

ProcedureSummary summarize_totals(const Procedure& procedure, const MetricTotals& t, std::uint64_t tests) {
  constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
  ProcedureSummary s;
  s.rule = procedure.name;
  s.runs = t.runs;
  s.tests = tests;
  if (const auto* rc = std::get_if<RuleConfig>(&procedure.config)) {
    s.target = rc->alpha;
    if (rc->kind == RuleKind::kAlphaInvesting) s.eta = rc->initial_wealth / rc->alpha;
    if (rc->kind == RuleKind::kLordPlusPlus || rc->kind == RuleKind::kSaffron ||
        rc->kind == RuleKind::kAddis) {
      s.evaluation = rc->evaluation;
    }
  } else {
    s.target = std::get<OfflineConfig>(procedure.config).alpha;
  }
  s.metric = promised_metric(procedure);
  const double n = static_cast<double>(t.runs);
  if (t.runs == 0) {
    s.mean_rejections = s.fdr = s.fdr_se = s.mfdr = s.mfdr_se = s.power = s.power_se = s.fwer = s.fwer_se =
        kNaN;
    s.promised = s.promised_se = kNaN;
    return s;
  }
  s.mean_rejections = t.rejections / n;
  s.fdr = t.fdp / n;
  s.fdr_se = sample_se(t.fdp, t.fdp_sq, n);
  s.mfdr = t.v / t.r1;
  if (t.runs >= 2) {
    const double m = s.mfdr;
    const double resid = std::max(0.0, t.v_sq - 2.0 * m * t.v_r1 + m * m * t.r1_sq);
    s.mfdr_se = std::sqrt(resid / (n * (n - 1))) / (t.r1 / n);
  } else {
    s.mfdr_se = kNaN;
  }
  s.fwer = static_cast<double>(t.any_false) / n;
  s.fwer_se = t.runs >= 2 ? std::sqrt(s.fwer * (1 - s.fwer) / (n - 1)) : kNaN;
  if (t.power_runs > 0) {
    const double pn = static_cast<double>(t.power_runs);
    s.power = t.power / pn;
    s.power_se = sample_se(t.power, t.power_sq, pn);
  } else {
    s.power = s.power_se = kNaN;
  }
  switch (s.metric) {
    case ErrorMetric::kFdr:
      s.promised = s.fdr;
      s.promised_se = s.fdr_se;
      break;
    case ErrorMetric::kFwer:
      s.promised = s.fwer;
      s.promised_se = s.fwer_se;
      break;
    case ErrorMetric::kMfdrEta: {
      // Foster & Stine (2008): E[V] / (E[R] + eta), as a ratio of means over runs.
      const double eta = s.eta;
      const double denominator = t.rejections / n + eta;
      const double m = (t.v / n) / denominator;
      s.promised = m;
      if (t.runs >= 2) {
        const double sum_d_sq = t.r_sq + 2 * eta * t.rejections + n * eta * eta;  // sum (R_i + eta)^2
        const double sum_v_d = t.v_r + eta * t.v;                                 // sum V_i (R_i + eta)
        const double resid = std::max(0.0, t.v_sq - 2.0 * m * sum_v_d + m * m * sum_d_sq);
        s.promised_se = std::sqrt(resid / (n * (n - 1))) / denominator;
      } else {
        s.promised_se = kNaN;
      }
      break;
    }
  }
  s.exceeds_target = exceeds_by_three_se(s.promised, s.promised_se, s.target);
  return s;
}

}  // namespace alphaledger
