// alphaledger launch STREAM --id ID | abandon STREAM --id ID | running STREAM: tests that overlap in
// time, whose level is reserved at launch (docs/ledger.md "Launch-time levels"). A launched test
// is decided with `alphaledger decide STREAM --id ID --p P` (--e E on a stream whose rule takes
// e-values: e-lond).
#include <iostream>

#include "alphaledger/forms.hpp"
#include "alphaledger/text.hpp"
#include "cli/ledger_common.hpp"

namespace alphaledger::cli {
namespace {

struct TestOptions {
  std::string stream;
  std::string id;
};

Status run_launch(const TestOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (auto s = validate_test_id(o.id); !s) return invalid_input("--id: " + s.error().message);
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto l = (*ledger)->launch(o.stream, o.id);
  if (!l) return l.error();
  // launch() returned: the reservation is synced. Only now is it printed.
  if (g.json) {
    out << launch_json(*l) << '\n';
  } else {
    // The hint names the number the stream's rule takes. The launch is durable already: should the
    // status read fail, the hint falls back to --p rather than the command failing.
    const auto info = (*ledger)->status(o.stream);
    const bool e_values = info && rule_takes_e_values(info->config.kind);
    out << format_number(l->level) << "  (level reserved for test " << l->id << ", launch " << l->launch
        << " of stream " << l->stream << "; decide it with: alphaledger decide " << l->stream << " --id "
        << l->id << (e_values ? " --e E)" : " --p P)");
    if (l->repeat)
      out << "  (repeat: running since " << format_timestamp(l->launched_at_ms) << "; nothing changed)";
    out << '\n';
  }
  out.flush();
  return {};
}

Status run_abandon(const TestOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (auto s = validate_test_id(o.id); !s) return invalid_input("--id: " + s.error().message);
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto a = (*ledger)->abandon(o.stream, o.id);
  if (!a) return a.error();
  if (g.json) {
    out << abandon_json(*a) << '\n';
  } else {
    out << "abandoned test " << a->id << " (launch " << a->launch << ", level " << format_rounded(a->level, 6)
        << ") in stream " << a->stream << "; it will never be decided  wealth " << format_rounded(a->wealth, 6);
    if (a->repeat)
      out << "  (repeat: abandoned before at " << format_timestamp(a->abandoned_at_ms) << "; nothing changed)";
    out << '\n';
  }
  out.flush();
  return {};
}

struct RunningOptions {
  std::string stream;
};

Status run_running(const RunningOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  auto running = (*ledger)->running(o.stream);
  if (!running) return running.error();
  if (!g.json) out << kRunningCsvHeader << '\n';
  for (const auto& r : *running) out << (g.json ? running_json(o.stream, r) : running_csv(r)) << '\n';
  return {};
}

}  // namespace

void add_launch_commands(CLI::App& app, CommandContext& ctx) {
  {
    auto o = std::make_shared<TestOptions>();
    CLI::App* sub = app.add_subcommand(
        "launch", "start a test: reserve its level now and print it; decide it later with decide");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->add_option("--id", o->id, "the test's id, unique in the stream")->required();
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_launch(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<TestOptions>();
    CLI::App* sub = app.add_subcommand(
        "abandon", "stop a running test that will never be decided; its reserved level is not refunded");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->add_option("--id", o->id, "the running test's id")->required();
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_abandon(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<RunningOptions>();
    CLI::App* sub = app.add_subcommand(
        "running", "the tests of a stream launched and not yet decided: id, launch, level, launched_at");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_running(*o, ctx.global, std::cout); }; });
  }
}

}  // namespace alphaledger::cli
