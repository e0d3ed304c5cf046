// alphaledger decide STREAM --id ID (--p P | --e E) | --file F [--format csv|jsonl] [--sync-every N]
#include <spdlog/spdlog.h>
#include <unistd.h>

#include <cstdint>
#include <cstdio>
#include <iostream>
#include <memory>

#include "alphaledger/forms.hpp"
#include "alphaledger/test_log.hpp"
#include "cli/cli_errors.hpp"
#include "cli/ledger_common.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger::cli {
namespace {

struct DecideOptions {
  std::string stream;
  std::optional<std::string> id;
  std::optional<std::string> p;
  std::optional<std::string> e;  // an e-value, for e-lond streams
  std::optional<std::string> file;
  std::optional<std::string> format;
  std::size_t sync_every = 256;
};

std::string decision_text(const DecideResult& d) {
  const auto& r = d.record;
  std::string line = "step " + std::to_string(r.step) + "  " + r.id + "  ";
  if (r.e_value) {  // e-lond: rejected iff e >= 1 / level
    line += (r.rejected ? "REJECTED  e_value " : "not rejected  e_value ") + format_rounded(r.p_value, 6) +
            (r.rejected ? " >= 1/level " : " < 1/level ") + format_rounded(1.0 / r.level, 6) + " (level " +
            format_rounded(r.level, 6) + ")";
  } else if (r.rejected) {
    line += "REJECTED  p_value " + format_rounded(r.p_value, 6) + " <= level " + format_rounded(r.level, 6);
  } else {
    line +=
        "not rejected  p_value " + format_rounded(r.p_value, 6) + " > level " + format_rounded(r.level, 6);
  }
  line += "  wealth " + format_rounded(r.wealth, 6);
  if (r.launched_at_ms != r.decided_at_ms) {  // launched before (alphaledger launch): say when
    line += "  (launch " + std::to_string(r.launch) + ", level reserved at " + format_timestamp(r.launched_at_ms) +
            ")";
  }
  if (d.repeat)
    line += "  (repeat: decided before at " + format_timestamp(r.decided_at_ms) + "; nothing changed)";
  return line;
}

// The number of --p or --e, checked against what the stream's rule takes.
Result<double> evidence_of(const DecideOptions& o, const StreamInfo& info) {
  const bool wants_e = rule_takes_e_values(info.config.kind);
  const std::string rule(rule_name(info.config.kind));
  if (wants_e && o.p) {
    return invalid_input("--p: stream " + o.stream + " uses rule " + rule +
                         ", which takes e-values: give --e E (an e-value >= 0), not --p (the ledger is unchanged)");
  }
  if (!wants_e && o.e) {
    return invalid_input("--e: stream " + o.stream + " uses rule " + rule +
                         ", which takes p-values: give --p P, not --e (only e-lond streams take e-values; the "
                         "ledger is unchanged)");
  }
  if (o.p) {
    auto p = parse_p_value_text(*o.p);
    if (!p) return invalid_input("--p: " + p.error().message);
    return *p;
  }
  auto e = parse_number_text(*o.e, "e_value");
  if (!e) return invalid_input("--e: " + e.error().message);
  if (auto v = validate_e_value(*e); !v) return invalid_input("--e: " + v.error().message);
  return *e;
}

Status run_decide_one(const DecideOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (auto s = validate_test_id(*o.id); !s) return invalid_input("--id: " + s.error().message);
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  auto x = evidence_of(o, *info);
  if (!x) return x.error();
  auto d = o.e ? (*ledger)->decide_e(o.stream, *o.id, *x) : (*ledger)->decide(o.stream, *o.id, *x);
  if (!d) return d.error();
  // decide() returned: the decision is synced. Only now is it printed.
  out << (g.json ? decision_json(*d) : decision_text(*d)) << '\n';
  out.flush();
  return {};
}

// The tests of a --file log, in decision order, as views into the log's ids (not copied), and
// each row's source line for messages. The log's 48-byte rows are released once these are built;
// the moment both exist (about 48 + 24 bytes a row, plus the ids) is the command's peak memory.
struct BatchInput {
  std::string source;                // the log's name in messages
  std::unique_ptr<std::string> ids;  // every id, back to back (the log's arena), never moved
  std::vector<TestView> tests;       // ids point into *ids
  // Most logs are decided in file order with one row a line: row i is on line first_line + i, and
  // no line numbers are kept. Otherwise (a log sorted by finished_at) lines[i] is row i's line.
  std::uint64_t first_line = 0;
  std::vector<std::uint64_t> lines;

  std::uint64_t line_of(std::size_t row) const { return lines.empty() ? first_line + row : lines[row]; }
};

Result<BatchInput> read_batch(const DecideOptions& o, const StreamInfo& info) {
  std::optional<std::string_view> forced;
  if (o.format) forced = *o.format;
  ReadOptions read_options;
  read_options.allow_duplicate_ids = true;      // a repeated id is a retry: the ledger judges it
  read_options.alternative = info.alternative;  // summary rows in the stream's direction
  auto log = read_log_argument(*o.file, forced, read_options);
  if (!log) return log.error();
  BatchInput b;
  b.source = std::move(log->source);
  // On the heap, so that moving `b` (into the Result) cannot move the bytes the views point to
  // (a short string would be copied, not handed over); trimmed to its size (it grew by doubling).
  b.ids = std::make_unique<std::string>(std::move(log->ids));
  b.ids->shrink_to_fit();
  const std::string_view ids = *b.ids;
  const auto& records = log->records;
  const bool e_values = rule_takes_e_values(info.config.kind);
  if (e_values && !log->has_e_values) {
    return invalid_input(b.source + ": stream " + info.name + " uses rule " + std::string(rule_name(info.config.kind)) +
                         ", which takes e-values: every row needs an e_value column (a number >= 0)");
  }
  if (!records.empty()) b.first_line = records.front().line;
  bool in_file_order = true;
  for (std::size_t i = 0; i < records.size() && in_file_order; ++i) {
    in_file_order = records[i].line == b.first_line + i;
  }
  // What the views need is taken first (16 bytes a row) and the log's rows (48) are released
  // before the views (32) are made, so that rows and views are never held together: at 10^6 rows
  // the peak is 64 MB of these instead of 80.
  struct Taken {
    std::uint64_t id_offset : 48;
    std::uint64_t id_size : 16;
    double value;
  };
  std::vector<Taken> taken;
  taken.reserve(records.size());
  if (!in_file_order) b.lines.reserve(records.size());
  for (const auto& r : records) {
    taken.push_back({r.id_offset, r.id_size, e_values ? r.e_value : r.p_value});
    if (!in_file_order) b.lines.push_back(r.line);
  }
  std::vector<CompactRecord>().swap(log->records);
  b.tests.reserve(taken.size());
  for (const auto& t : taken) b.tests.push_back({ids.substr(t.id_offset, t.id_size), t.value, e_values});
  return b;
}

// Prints each group of decisions once its write is synced, and counts them.
class BatchPrinter {
 public:
  BatchPrinter(std::ostream& out, bool json, std::string rule, std::size_t total)
      : out_(out),
        json_(json),
        rule_(std::move(rule)),
        total_(total),
        progress_(::isatty(STDERR_FILENO) != 0) {}

  void header(bool e_values) {
    if (!json_) out_ << (e_values ? kDecisionCsvHeaderE : kDecisionCsvHeader) << '\n';
    out_.flush();
  }
  void print(const std::vector<DecideResult>& group) {
    for (const auto& d : group) {
      out_ << (json_ ? decision_json(d, rule_) : decision_csv(d.record, rule_)) << '\n';
      if (d.repeat) ++repeats_;
    }
    out_.flush();
    done_ += group.size();
    if (progress_) std::fprintf(stderr, "\r%zu / %zu tests", done_, total_);
  }
  void finish() const {
    if (progress_) std::fprintf(stderr, "\n");
  }
  std::size_t done() const { return done_; }
  std::size_t repeats() const { return repeats_; }

 private:
  std::ostream& out_;
  bool json_;
  std::string rule_;
  std::size_t total_;
  bool progress_;
  std::size_t done_ = 0, repeats_ = 0;
};

// The error that stopped a batch, with where in the log it happened.
Error batch_error(const Ledger::BatchResult& batch, const BatchInput& input) {
  Error e = *batch.error;
  e.message = input.source + ":" + std::to_string(input.line_of(batch.stopped_at)) + ": " + e.message;
  if (is_storage_failure(e.kind) && batch.durable > 0) {
    e.message += " (the rows printed above are decided and durable; run the same command again to resume)";
  }
  return e;
}

Status run_decide_file(const DecideOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (o.sync_every == 0) return invalid_input("--sync-every must be at least 1, got 0");
  auto ledger = open_ledger(g, /*create=*/false);
  if (!ledger) return ledger.error();
  auto info = (*ledger)->status(o.stream);
  if (!info) return info.error();
  const bool e_values = rule_takes_e_values(info->config.kind);
  auto batch_input = read_batch(o, *info);
  if (!batch_input) return batch_input.error();
  const BatchInput& input = *batch_input;

  BatchPrinter printer(out, g.json, std::string(rule_name(info->config.kind)), input.tests.size());
  printer.header(e_values);
  auto batch = (*ledger)->decide_batch_streamed(o.stream, std::span<const TestView>(input.tests), o.sync_every,
                                                [&](const std::vector<DecideResult>& group) {
                                                  printer.print(group);  // after the group's sync
                                                });
  printer.finish();
  if (!batch) return batch.error();
  if (batch->error) return batch_error(*batch, input);
  spdlog::info("decided {} tests from {}: {} new, {} already in the ledger", printer.done(), input.source,
               printer.done() - printer.repeats(), printer.repeats());
  return {};
}

Status run_decide(const DecideOptions& o, const GlobalOptions& g, std::ostream& out) {
  const bool one = o.id.has_value() || o.p.has_value() || o.e.has_value();
  if (o.file && one) return invalid_input("give either --id ID with --p P or --e E, or --file F, not both");
  if (o.file) return run_decide_file(o, g, out);
  if (o.p && o.e) return invalid_input("give --p P (a p-value) or --e E (an e-value, e-lond streams), not both");
  if (!o.id || (!o.p && !o.e)) {
    return invalid_input(
        "decide needs --id ID and --p P (or --e E on an e-lond stream) for one test, or --file F (a log of "
        "tests)");
  }
  if (o.format) return invalid_input("--format applies only with --file");
  return run_decide_one(o, g, out);
}

}  // namespace

void add_decide_command(CLI::App& app, CommandContext& ctx) {
  auto o = std::make_shared<DecideOptions>();
  CLI::App* sub = app.add_subcommand("decide",
                                     "decide one test (--id, --p) or a log of tests (--file); each answer "
                                     "is durable before it is printed");
  sub->add_option("stream", o->stream, "stream name")->required();
  sub->add_option("--id", o->id, "test id: 1 to 256 bytes, no control characters; decided once");
  sub->add_option("--p", o->p, "the test's p-value, in [0, 1]");
  sub->add_option("--e", o->e, "the test's e-value, >= 0 (streams of rule e-lond; rejected iff e >= 1/level)");
  sub->add_option("--file", o->file,
                  "log of tests (replay format: CSV with a header, or JSON Lines); - reads standard input");
  sub->add_option("--format", o->format, "csv or jsonl; default from the file extension")
      ->check(CLI::IsMember({"csv", "jsonl"}));
  sub->add_option("--sync-every", o->sync_every,
                  "with --file: decisions per synced write (group commit); default 256");
  sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_decide(*o, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
