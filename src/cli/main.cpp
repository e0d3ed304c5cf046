// alphaledger: online false discovery rate control for streams of hypothesis tests.
#include <spdlog/sinks/base_sink.h>
#include <spdlog/sinks/stdout_color_sinks.h>
#include <spdlog/spdlog.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <iostream>
#include <memory>
#include <mutex>
#include <new>
#include <nlohmann/json.hpp>
#include <optional>
#include <string_view>

#include "alphaledger/ledger.hpp"
#include "alphaledger/test_log.hpp"
#include "cli/cli_errors.hpp"
#include "cli/command.hpp"
#include "cli/ledger_common.hpp"
#include "harness/json_text.hpp"

namespace alphaledger::cli {

void add_explain_command(CLI::App& app, CommandContext& ctx);  // src/cli/cmd_explain.cpp
void add_look_commands(CLI::App& app, CommandContext& ctx);    // src/cli/cmd_look.cpp: look, looks

std::string ledger_path(const GlobalOptions& global) {
  if (!global.ledger.empty()) return global.ledger;
  if (const char* env = std::getenv("ALPHALEDGER_LEDGER"); env != nullptr && *env != '\0') return env;
  return "alphaledger.db";
}

RuleSpec RuleFlags::to_spec(std::string rule) const {
  RuleSpec s;
  s.rule = std::move(rule);
  s.alpha = alpha;
  s.initial_wealth = initial_wealth;
  s.candidate_threshold = candidate_threshold;
  s.discard_threshold = discard_threshold;
  s.payout = payout;
  s.spending = spending;
  s.evaluation = evaluation;
  return s;
}

void add_rule_flags(CLI::App* sub, RuleFlags& f) {
  sub->add_option("--alpha", f.alpha,
                  "target FDR (mFDR for alpha-investing, FWER for alpha-spending), 0 < A < 1; default 0.05");
  sub->add_option("--initial-wealth", f.initial_wealth,
                  "W0, in estimated false discoveries (docs/rules.md); default alpha/2");
  sub->add_option("--candidate-threshold", f.candidate_threshold, "lambda (saffron, addis, storey-bh)");
  sub->add_option("--discard-threshold", f.discard_threshold, "tau, lambda < tau <= 1 (addis)");
  sub->add_option("--payout", f.payout, "paid on each rejection, <= alpha (alpha-investing)");
  sub->add_option("--spending", f.spending, "jm, jm:C, power:S or power-shift:S");
  sub->add_option("--evaluation", f.evaluation, "exact or fast (lord++, saffron, addis); default exact");
}

}  // namespace alphaledger::cli

namespace {

// With --json, log lines on stderr are JSON objects too, so that everything on stderr is JSON:
// {"time": ..., "level": ..., "message": ...}. A failure is the one line with an "error" key.
class JsonLogSink final : public spdlog::sinks::base_sink<std::mutex> {
 protected:
  void sink_it_(const spdlog::details::log_msg& msg) override {
    nlohmann::ordered_json j;
    const auto ms =
        std::chrono::duration_cast<std::chrono::milliseconds>(msg.time.time_since_epoch()).count();
    j["time"] = alphaledger::format_timestamp(ms);
    j["level"] = std::string(spdlog::level::to_string_view(msg.level).data(),
                             spdlog::level::to_string_view(msg.level).size());
    j["message"] = std::string(msg.payload.data(), msg.payload.size());
    std::cerr << alphaledger::json_text(j) + '\n';  // one write
  }
  void flush_() override { std::cerr.flush(); }
};

// Lower layers say what happened; the flag that would fix it is the command line's to name.
alphaledger::Error with_flag_hint(alphaledger::Error error, const CLI::App& app) {
  if (error.code == "no_ledger") {
    // Asked of the parsed command, not by name: the app may hold only the command that was run.
    const auto parsed = app.get_subcommands();
    const bool recover = !parsed.empty() && parsed.front()->get_name() == "recover";
    error.message += recover ? " (give the damaged ledger folder with --ledger DIR)"
                             : " (create a stream first, or give the ledger folder or URI with --ledger)";
  }
  return error;
}

}  // namespace

namespace alphaledger::cli {
namespace {

// The global flags, which every command line may use.
void add_global_flags(CLI::App& app, CommandContext& ctx) {
  app.footer(
      "A FILE argument of '-' reads standard input. Exit codes: 0 success, 2 bad usage or input,\n"
      "3 refused by the ledger, 4 storage failure; with --json a failure is one JSON object on\n"
      "stderr (docs/errors.md).\n\n" +
      std::string(kCaution));
  app.require_subcommand(1);
  app.fallthrough();
  app.set_version_flag("--version", ALPHALEDGER_VERSION);
  app.add_option("--ledger", ctx.global.ledger,
                 "ledger folder or postgresql:// URI; default $ALPHALEDGER_LEDGER, else ./alphaledger.db");
  app.add_flag("--json", ctx.global.json,
               "machine-readable output, one JSON object per line; errors too, as one JSON object on stderr");
  app.add_option("--log-level", ctx.global.log_level, "trace|debug|info|warn|error|off; default warn")
      ->check(CLI::IsMember({"trace", "debug", "info", "warn", "error", "off"}));
}

// The global flags and every subcommand, in the order --help lists them.
void build_app(CLI::App& app, CommandContext& ctx) {
  add_global_flags(app, ctx);
  add_replay_command(app, ctx);
  add_ledger_commands(app, ctx);
  add_simulate_command(app, ctx);
  add_stats_commands(app, ctx);
  add_service_commands(app, ctx);
  add_recover_command(app, ctx);
  add_report_command(app, ctx);
  add_explain_command(app, ctx);  // src/cli/cmd_explain.cpp
  add_look_commands(app, ctx);    // src/cli/cmd_look.cpp
}

// Building every subcommand (about 25 of them, with their options and checks) is a good part of
// a read command's few milliseconds, so a command line that names one command builds only the
// function that registers it (and the few commands registered with it). Every other line (--help,
// no command, an unknown one, anything the lazy app cannot read) is read again by the whole app,
// so that what it prints is the same as before, byte for byte (docs/benchmarks.md).
using AddCommands = void (*)(CLI::App&, CommandContext&);
struct Registration {
  std::string_view name;
  AddCommands add;
};
constexpr Registration kRegistrations[] = {
    {"replay", add_replay_command},       {"new", add_new_command},
    {"decide", add_decide_command},       {"next", add_stream_read_commands},
    {"status", add_stream_read_commands}, {"streams", add_stream_read_commands},
    {"history", add_history_command},     {"verify", add_verify_command},
    {"close", add_close_command},         {"launch", add_launch_commands},
    {"abandon", add_launch_commands},     {"running", add_launch_commands},
    {"copy", add_copy_command},
    {"simulate", add_simulate_command},   {"pvalue", add_stats_commands},
    {"plan", add_stats_commands},         {"pipe", add_service_commands},
    {"serve", add_service_commands},      {"recover", add_recover_command},
    {"report", add_report_command},       {"explain", add_explain_command},
    {"look", add_look_commands},          {"looks", add_look_commands},
};

const Registration* registration_of(std::string_view word) {
  for (const auto& r : kRegistrations) {
    if (r.name == word) return &r;
  }
  return nullptr;
}

// What the lazy app needs to hold for this command line.
struct LazyPlan {
  bool usable = false;                    // false: build the whole app
  const Registration* command = nullptr;  // null with usable: global flags only (--version)
};

// Global flags first (--ledger X, --log-level X, --json, in either form), then a command's name.
// The whole app is needed for a help flag anywhere, "--", a word before the command that is not a
// global flag, an unknown command, or a second command name anywhere on the line (CLI11 reads it
// as a value, but the cheap path does not rely on that).
LazyPlan plan_for(const std::vector<std::string>& args) {
  std::size_t i = 0;
  bool version = false;
  for (; i < args.size(); ++i) {
    const std::string& a = args[i];
    if (a == "--json") continue;
    if (a == "--version") {
      version = true;
      continue;
    }
    if (a == "--ledger" || a == "--log-level") {
      ++i;
      continue;
    }
    if (a.starts_with("--ledger=") || a.starts_with("--log-level=")) continue;
    break;
  }
  if (i >= args.size()) return LazyPlan{.usable = version, .command = nullptr};  // only global flags
  const Registration* command = registration_of(args[i]);
  if (command == nullptr || version) return {};
  for (std::size_t j = i + 1; j < args.size(); ++j) {
    const std::string& a = args[j];
    if (a == "-h" || a == "--help" || a == "--version" || a == "--" || registration_of(a) != nullptr)
      return {};
  }
  return LazyPlan{.usable = true, .command = command};
}

void set_up_logging(const GlobalOptions& global) {
  std::shared_ptr<spdlog::logger> logger;
  if (global.json) {
    logger = std::make_shared<spdlog::logger>("alphaledger", std::make_shared<JsonLogSink>());
  } else {
    logger = spdlog::stderr_color_mt("alphaledger");
  }
  spdlog::set_default_logger(logger);
  spdlog::set_level(spdlog::level::from_str(global.log_level));
}

int fail(const Failure& f, bool json) {
  print_failure(std::cerr, f, json);
  return f.exit_code;
}

// Runs the parsed command; an exception that escapes it is an internal failure, said plainly.
int run_command(const CommandContext& ctx, const CLI::App& app) {
  if (!ctx.run) {  // cannot happen: every leaf command sets it; say so rather than exit silently
    return fail(usage_failure("no command given; see 'alphaledger --help'"), ctx.global.json);
  }
  Status status;
  try {
    status = ctx.run();
  } catch (const std::bad_alloc&) {
    std::cout.flush();
    return fail(internal_failure("out of memory; the ledger is as it was before the failed step"),
                ctx.global.json);
  } catch (const std::exception& e) {
    // A library's exception text is not a message for people: keep it for --log-level debug.
    spdlog::debug("unexpected exception: {}", excerpt(e.what(), 200));
    std::cout.flush();
    return fail(internal_failure(
                    "an unexpected internal failure stopped the command; the ledger keeps every decision "
                    "printed before it (run with --log-level debug for details)"),
                ctx.global.json);
  }
  std::cout.flush();
  if (!status) return fail(failure_from(with_flag_hint(status.error(), app)), ctx.global.json);
  return 0;
}

// Ends the process once the command has finished. Every command has closed its ledger by then (it
// is a local of the command's run function), and output is flushed here, so what is left for exit()
// is the destruction of static objects: RocksDB's option tables, the logger registry, CLI11's
// checks. That was a measurable part of a read command's cost (docs/benchmarks.md "CLI fixed cost
// after lazy start"), so it is skipped; except under a sanitizer, whose leak check runs at exit.
[[noreturn]] void leave(int code) {
  std::cout.flush();
  std::cerr.flush();
  std::fflush(nullptr);
#if defined(__SANITIZE_ADDRESS__) || defined(__SANITIZE_THREAD__)
  std::exit(code);
#elif defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer)
  std::exit(code);
#else
  std::_Exit(code);
#endif
#else
  std::_Exit(code);
#endif
}

constexpr const char* kDescription =
    "alphaledger " ALPHALEDGER_VERSION
    ": decide each hypothesis test the moment it finishes, keeping the false discovery\n"
    "rate of the whole stream below a target (LORD++, SAFFRON, ADDIS, LOND, alpha-investing,\n"
    "alpha-spending), with a durable, verifiable ledger.";

// The cheap path: an app with the global flags and the named command's registration only. Returns
// the exit code, or nothing when the line must be read by the whole app instead (it did not parse
// cleanly into exactly the planned command). Nothing has run and nothing was printed then.
std::optional<int> run_lazily(const LazyPlan& plan, const std::vector<std::string>& args, int argc,
                              char** argv) {
  CLI::App app{kDescription};
  CommandContext ctx;
  add_global_flags(app, ctx);
  if (plan.command != nullptr) plan.command->add(app, ctx);
  if (!check_arguments(app, args).empty()) return std::nullopt;
  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForVersion& e) {  // its text does not depend on the commands
    return app.exit(e);
  } catch (const CLI::Error&) {
    return std::nullopt;
  }
  const auto parsed = app.get_subcommands();
  if (plan.command == nullptr || parsed.size() != 1 || parsed.front()->get_name() != plan.command->name) {
    return std::nullopt;
  }
  set_up_logging(ctx.global);
  leave(run_command(ctx, app));
}

}  // namespace
}  // namespace alphaledger::cli

int main(int argc, char** argv) {
  using namespace alphaledger;
  using namespace alphaledger::cli;
  const std::vector<std::string> args(argv + std::min(argc, 1), argv + argc);
  if (const LazyPlan plan = plan_for(args); plan.usable) {
    if (auto code = run_lazily(plan, args, argc, argv)) return *code;
  }
  CLI::App app{kDescription};
  CommandContext ctx;
  build_app(app, ctx);
  if (const std::string problem = check_arguments(app, args); !problem.empty()) {
    return fail(usage_failure(problem), wants_json(args));
  }
  try {
    app.parse(argc, argv);
  } catch (const CLI::Success& e) {  // --help, --version
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    return fail(usage_failure(explain_usage_error(app, args, e)), wants_json(args));
  }
  set_up_logging(ctx.global);
  leave(run_command(ctx, app));
}
