// alphaledger next STREAM | status STREAM | streams: reading a stream's state, changing nothing.
#include <spdlog/spdlog.h>

#include <iostream>

#include "alphaledger/forms.hpp"
#include "cli/ledger_common.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger::cli {
namespace {

struct StreamOptions {
  std::string stream;
};

Status run_next(const StreamOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  if (auto level = (*ledger)->next_level(o.stream); !level) return level.error();  // e.g. closed
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  if (g.json) {
    out << next_level_json(info->name, info->tests + 1, info->next_level) << '\n';
  } else {
    out << format_number(info->next_level) << "  (level of step " << info->tests + 1 << " in stream "
        << info->name << ")\n";
  }
  return {};
}

Status run_status(const StreamOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  if (g.json) {
    out << stream_json(*info) << '\n';
    return {};
  }
  out << "stream      " << info->name << "\n"
      << "rule        " << describe_config(info->config) << "\n"
      << "direction   " << alternative_name(info->alternative) << " (for rows given as summaries)\n"
      << "created     " << format_timestamp(info->created_at_ms) << "\n"
      << "tests       " << info->tests << "\n"
      << "rejections  " << info->rejections << "\n"
      << "wealth      " << format_rounded(info->wealth, 6) << "\n"
      << "running     " << info->running << " tests, reserved " << format_rounded(info->reserved, 6)
      << " (alphaledger running " << info->name << " lists them)\n";
  if (info->closed_at_ms) {
    out << "closed      " << format_timestamp(*info->closed_at_ms) << " (takes no more tests)\n";
  } else {
    out << "next level  " << format_rounded(info->next_level, 6) << "\n";
  }
  return {};
}

Status run_streams(const GlobalOptions& g, std::ostream& out) {
  auto ledger = open_for_reading(g);
  if (!ledger) {
    if (ledger.error().kind == ErrorKind::kNotFound) {  // no ledger yet: no streams
      spdlog::warn("{}", ledger.error().message);
      return {};
    }
    return ledger.error();
  }
  auto all = (*ledger)->streams();
  if (!all) return all.error();
  for (const auto& s : *all) {
    if (g.json) {
      out << stream_json(s) << '\n';
    } else {
      out << s.name << "  " << rule_name(s.config.kind) << "  tests " << s.tests << "  rejections "
          << s.rejections << "  wealth " << format_rounded(s.wealth, 6);
      if (s.running > 0) out << "  running " << s.running;
      if (s.closed_at_ms) out << "  closed " << format_timestamp(*s.closed_at_ms);
      out << "\n";
    }
  }
  return {};
}

}  // namespace

void add_stream_read_commands(CLI::App& app, CommandContext& ctx) {
  {
    auto o = std::make_shared<StreamOptions>();
    CLI::App* sub =
        app.add_subcommand("next", "the level the next test of a stream will get; changes nothing");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_next(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<StreamOptions>();
    CLI::App* sub =
        app.add_subcommand("status", "a stream's configuration, tests, rejections, wealth and next level");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_status(*o, ctx.global, std::cout); }; });
  }
  {
    CLI::App* sub = app.add_subcommand("streams", "one line per stream in the ledger");
    sub->callback([&ctx] { ctx.run = [&ctx] { return run_streams(ctx.global, std::cout); }; });
  }
}

}  // namespace alphaledger::cli
