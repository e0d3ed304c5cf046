// The ledger commands: new, decide, next, status, streams, history, verify, close (docs/ledger.md).
// Each opens the ledger folder, does one thing, and closes it.
#include <spdlog/spdlog.h>
#include <unistd.h>

#include <cstdio>
#include <iostream>
#include <nlohmann/json.hpp>

#include "alphaledger/ledger.hpp"
#include "alphaledger/test_log.hpp"
#include "cli/cli_errors.hpp"
#include "cli/command.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger::cli {
namespace {

using Json = nlohmann::ordered_json;

std::string dump(const Json& j) { return j.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace); }

// Opens the ledger. Only `new` creates a missing ledger; every other command refuses (exit 3)
// rather than leave an empty folder behind.
Result<std::unique_ptr<Ledger>> open_ledger(const GlobalOptions& g, bool create) {
  return Ledger::open(ledger_path(g), RocksStoreOptions{.create_if_missing = create});
}

// Opens the ledger for reading only (status, history, verify, streams, next): takes no lock, so it
// works beside a running serve and in a read-only folder, and writes no file (docs/ledger.md).
Result<std::unique_ptr<Ledger>> open_for_reading(const GlobalOptions& g, bool check_all_files = false) {
  return Ledger::open(ledger_path(g), RocksStoreOptions{
                                          .create_if_missing = false,
                                          .read_only = true,
                                          .check_all_files = check_all_files,
                                      });
}

Json config_json(const RuleConfig& c) {
  Json j;
  j["rule"] = std::string(rule_name(c.kind));
  j["alpha"] = c.alpha;
  if (rule_takes(c.kind, "initial_wealth")) j["initial_wealth"] = c.initial_wealth;
  if (rule_takes(c.kind, "candidate_threshold")) j["candidate_threshold"] = c.candidate_threshold;
  if (rule_takes(c.kind, "discard_threshold")) j["discard_threshold"] = c.discard_threshold;
  if (rule_takes(c.kind, "payout")) j["payout"] = c.payout;
  if (rule_takes(c.kind, "spending")) j["spending"] = c.spending;
  if (rule_takes(c.kind, "evaluation")) j["evaluation"] = std::string(evaluation_name(c.evaluation));
  return j;
}

Json info_json(const StreamInfo& s) {
  Json j;
  j["stream"] = s.name;
  j.update(config_json(s.config));
  // Like the rule parameters, shown only when it applies: a direction other than two-sided.
  if (s.alternative != Alternative::kTwoSided)
    j["alternative"] = std::string(alternative_name(s.alternative));
  j["created_at"] = format_timestamp(s.created_at_ms);
  j["tests"] = s.tests;
  j["rejections"] = s.rejections;
  j["wealth"] = s.wealth;
  j["next_level"] = s.next_level;
  // Shown only for a closed stream, like alternative.
  if (s.closed_at_ms) j["closed_at"] = format_timestamp(*s.closed_at_ms);
  return j;
}

// ---- new ----------------------------------------------------------------------------------

struct NewOptions {
  std::string stream;
  std::string rule;
  RuleFlags flags;
  std::optional<std::string> alternative;
};

Status run_new(const NewOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto config = resolve_config(o.flags.to_spec(o.rule));
  if (!config) return config.error();
  Alternative alternative = Alternative::kTwoSided;
  if (o.alternative) {
    auto a = parse_alternative(*o.alternative);
    if (!a) return invalid_input("--alternative: " + a.error().message);
    alternative = *a;
  }
  auto ledger = open_ledger(g, /*create=*/true);
  if (!ledger) return ledger.error();
  auto created = (*ledger)->create_stream_directed(o.stream, *config, alternative);
  if (!created) return created.error();
  if (g.json) {
    Json j = info_json(created->info);
    j["created"] = created->created;
    out << dump(j) << '\n';
  } else if (created->created) {
    out << "created stream " << o.stream << ": " << describe_config(*config)
        << (alternative == Alternative::kTwoSided
                ? ""
                : " alternative=" + std::string(alternative_name(alternative)))
        << "\n"
        << "first level: " << format_number(created->info.next_level) << "\n";
  } else {
    out << "stream " << o.stream << " already exists with this configuration; nothing changed\n";
  }
  return {};
}

// ---- decide -------------------------------------------------------------------------------

struct DecideOptions {
  std::string stream;
  std::optional<std::string> id;
  std::optional<std::string> p;
  std::optional<std::string> file;
  std::optional<std::string> format;
  std::size_t sync_every = 256;
};

std::string decision_text(const DecideResult& d) {
  const auto& r = d.record;
  std::string line = "step " + std::to_string(r.step) + "  " + r.id + "  ";
  if (r.rejected) {
    line += "REJECTED  p_value " + format_rounded(r.p_value, 6) + " <= level " + format_rounded(r.level, 6);
  } else {
    line +=
        "not rejected  p_value " + format_rounded(r.p_value, 6) + " > level " + format_rounded(r.level, 6);
  }
  line += "  wealth " + format_rounded(r.wealth, 6);
  if (d.repeat)
    line += "  (repeat: decided before at " + format_timestamp(r.decided_at_ms) + "; nothing changed)";
  return line;
}

Status run_decide_one(const DecideOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto p = parse_p_value_text(*o.p);
  if (!p) return invalid_input("--p: " + p.error().message);
  if (auto s = validate_test_id(*o.id); !s) return invalid_input("--id: " + s.error().message);
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto d = (*ledger)->decide(o.stream, *o.id, *p);
  if (!d) return d.error();
  // decide() returned: the decision is synced. Only now is it printed.
  out << (g.json ? decision_json(*d) : decision_text(*d)) << '\n';
  out.flush();
  return {};
}

Status run_decide_file(const DecideOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.sync_every == 0) return invalid_input("--sync-every must be at least 1, got 0");
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  const std::string rule(rule_name(info->config.kind));

  std::optional<std::string_view> forced;
  if (o.format) forced = *o.format;
  ReadOptions read_options;
  read_options.allow_duplicate_ids = true;       // a repeated id is a retry: the ledger judges it
  read_options.alternative = info->alternative;  // summary rows in the stream's direction
  auto log = read_log_argument(*o.file, forced, read_options);
  if (!log) return log.error();
  std::vector<TestInput> inputs;
  inputs.reserve(log->size());
  for (const auto& r : log->records) inputs.push_back({std::string(log->id(r)), r.p_value});
  log->ids = {};  // the inputs hold the ids now; the records keep the line numbers for messages

  const bool progress = ::isatty(STDERR_FILENO) != 0;
  std::size_t done = 0, repeats = 0;
  if (!g.json) out << "rule,step,id,p_value,level,rejected,wealth\n";
  out.flush();
  auto print_group = [&](const std::vector<DecideResult>& group) {
    // Called only after the group's write was synced.
    for (const auto& d : group) {
      const auto& r = d.record;
      if (g.json) {
        out << decision_json(d, rule) << '\n';
      } else {
        out << rule << ',' << r.step << ',' << csv_field(r.id) << ',' << format_number(r.p_value) << ','
            << format_number(r.level) << ',' << (r.rejected ? '1' : '0') << ',' << format_number(r.wealth)
            << '\n';
      }
      if (d.repeat) ++repeats;
    }
    out.flush();
    done += group.size();
    if (progress) std::fprintf(stderr, "\r%zu / %zu tests", done, inputs.size());
  };
  auto batch = (*ledger)->decide_batch_streamed(o.stream, inputs, o.sync_every, print_group);
  if (progress) std::fprintf(stderr, "\n");
  if (!batch) return batch.error();
  if (batch->error) {
    const CompactRecord& at = log->records[batch->stopped_at];
    Error e = *batch->error;
    e.message = log->source + ":" + std::to_string(at.line) + ": " + e.message;
    if (is_storage_failure(e.kind) && !batch->decided.empty()) {
      e.message += " (the rows printed above are decided and durable; run the same command again to resume)";
    }
    return e;
  }
  spdlog::info("decided {} tests from {}: {} new, {} already in the ledger", done, log->source,
               done - repeats, repeats);
  return {};
}

Status run_decide(const DecideOptions& o, const GlobalOptions& g, std::ostream& out) {
  const bool one = o.id.has_value() || o.p.has_value();
  if (o.file && one) return invalid_input("give either --id ID --p P, or --file F, not both");
  if (o.file) return run_decide_file(o, g, out);
  if (!o.id || !o.p) {
    return invalid_input("decide needs --id ID and --p P (one test), or --file F (a log of tests)");
  }
  if (o.format) return invalid_input("--format applies only with --file");
  return run_decide_one(o, g, out);
}

// ---- next, status, streams ----------------------------------------------------------------

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
    out << dump(Json{{"stream", info->name}, {"step", info->tests + 1}, {"level", info->next_level}}) << '\n';
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
    out << dump(info_json(*info)) << '\n';
    return {};
  }
  out << "stream      " << info->name << "\n"
      << "rule        " << describe_config(info->config) << "\n"
      << "direction   " << alternative_name(info->alternative) << " (for rows given as summaries)\n"
      << "created     " << format_timestamp(info->created_at_ms) << "\n"
      << "tests       " << info->tests << "\n"
      << "rejections  " << info->rejections << "\n"
      << "wealth      " << format_rounded(info->wealth, 6) << "\n";
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
      out << dump(info_json(s)) << '\n';
    } else {
      out << s.name << "  " << rule_name(s.config.kind) << "  tests " << s.tests << "  rejections "
          << s.rejections << "  wealth " << format_rounded(s.wealth, 6);
      if (s.closed_at_ms) out << "  closed " << format_timestamp(*s.closed_at_ms);
      out << "\n";
    }
  }
  return {};
}

// ---- history, verify ----------------------------------------------------------------------

struct HistoryOptions {
  std::string stream;
  std::string format = "csv";
  std::uint64_t from = 1;
  std::optional<std::uint64_t> limit;
};

Status run_history(const HistoryOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.limit && *o.limit == 0) return invalid_input("--limit must be at least 1, got 0");
  auto ledger = open_for_reading(g);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  const std::string rule(rule_name(info->config.kind));
  const bool json = g.json || o.format == "jsonl";
  if (!json) out << "rule,step,id,p_value,level,rejected,wealth,decided_at\n";
  // Row by row as the records are read: a long history is never held in memory.
  std::uint64_t printed = 0;
  auto s = (*ledger)->for_each_decision(o.stream, o.from, [&](const DecisionRecord& r) {
    if (json) {
      out << dump(Json{{"rule", rule},
                       {"step", r.step},
                       {"id", r.id},
                       {"p_value", r.p_value},
                       {"level", r.level},
                       {"rejected", r.rejected ? 1 : 0},
                       {"wealth", r.wealth},
                       {"decided_at", format_timestamp(r.decided_at_ms)}})
          << '\n';
    } else {
      out << rule << ',' << r.step << ',' << csv_field(r.id) << ',' << format_number(r.p_value) << ','
          << format_number(r.level) << ',' << (r.rejected ? '1' : '0') << ',' << format_number(r.wealth)
          << ',' << format_timestamp(r.decided_at_ms) << '\n';
    }
    return !o.limit || ++printed < *o.limit;
  });
  out.flush();
  return s;
}

struct VerifyOptions {
  std::string stream;
  std::optional<std::uint64_t> at_step;
  std::vector<std::string> expect;
};

Status run_verify(const VerifyOptions& o, const GlobalOptions& g, std::ostream& out) {
  std::vector<Anchor> anchors;
  for (const auto& text : o.expect) {
    auto a = parse_anchor(text);
    if (!a) return invalid_input("--expect: " + a.error().message);
    anchors.push_back(std::move(*a));
  }
  auto ledger = open_for_reading(g, /*check_all_files=*/true);
  if (!ledger) return ledger.error();
  auto report = (*ledger)->verify(o.stream, anchors);
  if (!report) return report.error();
  std::optional<std::string> hash_at;
  if (o.at_step && report->ok) {
    auto h = (*ledger)->chain_hash_at(o.stream, *o.at_step);
    if (!h) return invalid_input("--at-step: " + h.error().message);
    hash_at = *h;
  }
  if (g.json) {
    Json j{{"stream", o.stream}, {"ok", report->ok}, {"steps", report->steps}};
    if (report->ok) {
      j["chain_hash"] = report->chain_hash;
      if (report->closed_at_ms) {
        j["closed_at"] = format_timestamp(*report->closed_at_ms);
        j["closing_hash"] = report->closing_hash;
      }
      j["anchors_checked"] = report->anchors_checked;
      if (hash_at) {
        j["at_step"] = *o.at_step;
        j["chain_hash_at_step"] = *hash_at;
      }
    } else {
      j["first_bad_step"] = report->first_bad_step;
      j["problem"] = report->problem;
    }
    out << dump(j) << '\n';
  }
  if (!report->ok) {
    return conflict("stream " + o.stream + " fails verification at step " +
                        std::to_string(report->first_bad_step) + ": " + report->problem,
                    "verification_failed");
  }
  if (!g.json) {
    out << "ok: stream " << o.stream << ", " << report->steps
        << " records; hash chain, levels, decisions, wealth and rule state all match a replay\n"
        << "ends at step " << report->steps << ", chain hash " << report->chain_hash << "\n";
    if (report->closed_at_ms) {
      out << "closed since " << format_timestamp(*report->closed_at_ms) << ", closing hash "
          << report->closing_hash << "\n";
    }
    if (report->anchors_checked > 0) out << "anchors: all " << report->anchors_checked << " match\n";
    if (hash_at) out << "chain hash at step " << *o.at_step << " " << *hash_at << "\n";
    out << "to check this point later: alphaledger verify " << o.stream << " --expect "
        << anchor_text(Anchor{report->steps, false, report->chain_hash});
    if (report->closed_at_ms) out << " --expect " << anchor_text(Anchor{0, true, report->closing_hash});
    out << "\n";
  }
  return {};
}

// ---- close --------------------------------------------------------------------------------

Status run_close(const StreamOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto closing = (*ledger)->close_stream(o.stream);
  if (!closing) return closing.error();
  const StreamInfo& info = closing->info;
  if (g.json) {
    Json j = info_json(info);
    j["closed_now"] = closing->newly_closed;
    j["closing_hash"] = closing->closing_hash;
    out << dump(j) << '\n';
  } else if (closing->newly_closed) {
    out << "closed stream " << o.stream << " at " << format_timestamp(*info.closed_at_ms) << " (tests "
        << info.tests << ", rejections " << info.rejections << "); it takes no more tests\n"
        << "closing hash " << closing->closing_hash << " (keep it: verify " << o.stream
        << " --expect closed:HASH)\n";
  } else {
    out << "stream " << o.stream << " is already closed (since " << format_timestamp(*info.closed_at_ms)
        << "); nothing changed\n";
  }
  return {};
}

}  // namespace

void add_ledger_commands(CLI::App& app, CommandContext& ctx) {
  {
    auto o = std::make_shared<NewOptions>();
    CLI::App* sub =
        app.add_subcommand("new", "create a stream; its rule and parameters are frozen from now on");
    sub->add_option("stream", o->stream, "stream name: letters, digits, '-', '_', '.' (at most 128)")
        ->required();
    sub->add_option("--rule", o->rule, "alpha-spending, alpha-investing, lond, lord++, saffron or addis")
        ->required();
    add_rule_flags(sub, o->flags);
    sub->add_option("--alternative", o->alternative,
                    "two-sided, greater or less: how decide --file turns summary rows into p-values "
                    "(docs/formats.md); frozen with the stream; default two-sided");
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_new(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<DecideOptions>();
    CLI::App* sub = app.add_subcommand("decide",
                                       "decide one test (--id, --p) or a log of tests (--file); each answer "
                                       "is durable before it is printed");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->add_option("--id", o->id, "test id: 1 to 256 bytes, no control characters; decided once");
    sub->add_option("--p", o->p, "the test's p-value, in [0, 1]");
    sub->add_option("--file", o->file, "log of tests (replay format: CSV with a header, or JSON Lines); - reads standard input");
    sub->add_option("--format", o->format, "csv or jsonl; default from the file extension")
        ->check(CLI::IsMember({"csv", "jsonl"}));
    sub->add_option("--sync-every", o->sync_every,
                    "with --file: decisions per synced write (group commit); default 256");
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_decide(*o, ctx.global, std::cout); }; });
  }
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
  {
    auto o = std::make_shared<HistoryOptions>();
    CLI::App* sub =
        app.add_subcommand("history", "every decision of a stream, in order, with the time it was made");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->add_option("--format", o->format, "csv or jsonl; default csv")
        ->check(CLI::IsMember({"csv", "jsonl"}));
    sub->add_option("--from", o->from, "start at this step (default 1)");
    sub->add_option("--limit", o->limit, "print at most this many decisions (default all)");
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_history(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<VerifyOptions>();
    CLI::App* sub = app.add_subcommand(
        "verify", "replay a stream's history through its rule and check every record and the hash chain");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->add_option("--at-step", o->at_step,
                    "also print the chain hash at this step (compare with one you kept)");
    sub->add_option("--expect", o->expect,
                    "STEP:HASH (or closed:HASH) noted from an earlier verify: the ledger must still hold "
                    "that step with that chain hash; repeatable")
        ->allow_extra_args(false);  // one anchor per --expect, so it never swallows the stream name
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_verify(*o, ctx.global, std::cout); }; });
  }
  {
    auto o = std::make_shared<StreamOptions>();
    CLI::App* sub = app.add_subcommand(
        "close", "close a stream: it takes no more tests; its history stays readable and verifiable");
    sub->add_option("stream", o->stream, "stream name")->required();
    sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_close(*o, ctx.global, std::cout); }; });
  }
}

}  // namespace alphaledger::cli
