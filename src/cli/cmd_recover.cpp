// recover: copy what can be proven out of a damaged ledger into a new folder (docs/ledger.md
// "Recovering a damaged ledger").
#include <iostream>
#include <nlohmann/json.hpp>

#include "alphaledger/ledger.hpp"
#include "alphaledger/recover.hpp"
#include "cli/command.hpp"
#include "harness/json_text.hpp"

namespace alphaledger::cli {
namespace {

using Json = nlohmann::ordered_json;

std::string dump(const Json& j) { return json_text(j); }

struct RecoverOptions {
  std::string to;
};

std::string steps_text(std::uint64_t first, std::uint64_t last) {
  if (first == last) return "step " + std::to_string(first);
  return "steps " + std::to_string(first) + ".." + std::to_string(last);
}

// One line (text) or one JSON object for a recovered stream.
void print_stream(std::ostream& out, const StreamRecovery& s, bool json) {
  const bool lost_known = s.known_steps && *s.known_steps > s.kept_steps;
  // Steps may be lost (a closing that was not proven alone loses none).
  const bool steps_lost = lost_known || !s.problem.empty() || !s.head_problem.empty();
  if (json) {
    Json j{{"stream", s.stream}, {"kept_steps", s.kept_steps}};
    j["known_steps"] = s.known_steps ? Json(*s.known_steps) : Json(nullptr);
    j["lost_from_step"] = !steps_lost ? Json(nullptr) : Json(s.kept_steps + 1);
    j["lost_to_step"] = lost_known ? Json(*s.known_steps) : Json(nullptr);
    j["complete"] = s.complete();
    j["problem"] = s.problem;
    // Only for a stream that is closed in the new ledger, as status --json shows closed_at.
    if (s.closed_at_ms) {
      j["closed_at"] = format_timestamp(*s.closed_at_ms);
      j["closing_hash"] = s.closing_hash;
      j["closing_proven"] = s.closing_proven;
      j["closing_problem"] = s.closing_problem;
    }
    if (!s.head_problem.empty()) j["head_problem"] = s.head_problem;
    out << dump(j) << '\n';
    return;
  }
  out << "stream " << s.stream << ": ";
  if (s.kept_steps == 0) {
    out << "no steps kept";
  } else {
    out << "kept " << steps_text(1, s.kept_steps);
  }
  if (lost_known) {
    out << "; lost " << steps_text(s.kept_steps + 1, *s.known_steps);
  } else if (steps_lost) {
    out << "; later steps, if any, lost";
  }
  if (!s.problem.empty()) out << " (" << s.problem << ")";
  if (!s.head_problem.empty()) out << "; " << s.head_problem;
  if (s.closed_at_ms) {
    out << "; closed since " << format_timestamp(*s.closed_at_ms);
    if (s.closing_proven) {
      out << ", closing kept (closing hash " << s.closing_hash << ")";
    } else {
      out << ", closing NOT proven: " << s.closing_problem << " (new closing hash " << s.closing_hash << ")";
    }
  }
  out << '\n';
}

// The closing summary of a recovery: one JSON object, or a few lines of text.
void print_summary(std::ostream& out, const RecoveryReport& report, bool json) {
  std::string other_names;
  for (const auto& k : report.other_key_names) other_names += (other_names.empty() ? "" : ", ") + k;
  if (report.other_keys_copied > report.other_key_names.size()) other_names += ", ...";
  if (json) {
    Json j{{"recovered_to", report.target},           {"source", report.source},
           {"streams", report.streams.size()},        {"complete", report.complete()},
           {"source_problem", report.source_problem}, {"other_keys_copied", report.other_keys_copied}};
    j["other_keys_verified"] = false;  // copied as they were: the format says nothing about them
    j["other_key_names"] = report.other_key_names;
    j["streams_without_configuration"] = report.streams_without_configuration;
    out << dump(j) << '\n';
    return;
  }
  out << "recovered " << report.streams.size() << " stream(s) from " << report.source << " into "
      << report.target << "; the new ledger passes verify\n";
  if (!report.source_problem.empty()) out << "damage found in the source: " << report.source_problem << '\n';
  if (report.other_keys_copied > 0)
    out << report.other_keys_copied
        << " key(s) that are no part of the ledger format were copied as they were, NOT verified: " << other_names
        << '\n';
  for (const auto& name : report.streams_without_configuration)
    out << "stream " << name
        << ": records or a head without a configuration; nothing of it can be proven, nothing copied\n";
}

Status run_recover(const RecoverOptions& o, const GlobalOptions& g, std::ostream& out) {
  const std::string source = ledger_path(g);
  if (is_postgres_uri(source)) {
    return invalid_input("recover works on a ledger folder; a PostgreSQL ledger (" + redact_uri(source) +
                         ") has its own recovery: restore the database from its backups or replicas "
                         "(docs/postgresql.md)");
  }
  auto report = recover_ledger(source, o.to);
  if (!report) {
    // The library names the folder; the command line names the flag that gave it.
    if (report.error().kind == ErrorKind::kInvalidArgument)
      return with_message(report.error(), "recover --to: " + report.error().message);
    return report.error();
  }
  for (const auto& s : report->streams) print_stream(out, s, g.json);
  print_summary(out, *report, g.json);
  out.flush();
  if (!report->complete()) {
    return corruption(
        "ledger " + source + " was damaged: " +
        (report->source_problem.empty()
             ? std::string("some of it (decisions, a closing, a stream) could not be proven")
             : std::string("decisions written after the damaged point may be lost, and not all "
                           "such losses can be counted")) +
        "; what could be proven is in " + o.to + " (see the lines above)");
  }
  return {};
}

}  // namespace

void add_recover_command(CLI::App& app, CommandContext& ctx) {
  auto o = std::make_shared<RecoverOptions>();
  CLI::App* sub = app.add_subcommand(
      "recover",
      "copy every stream's configuration and every decision that can be proven from a damaged ledger "
      "(--ledger) into a new folder; the damaged ledger is not changed");
  sub->add_option("--to", o->to, "the new ledger folder: must not exist, or be empty")->required();
  sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_recover(*o, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
