// alphaledger copy STREAM --to LOCATION: one stream, every key of it, from --ledger (opened for
// reading only) into another ledger location, then verify on the copy (docs/ledger.md "Moving a
// stream"). The key copying is the store layer's (alphaledger/copy_stream.hpp).
#include <iostream>
#include <nlohmann/json.hpp>

#include "alphaledger/copy_stream.hpp"
#include "alphaledger/text.hpp"
#include "cli/ledger_common.hpp"
#include "harness/json_text.hpp"

namespace alphaledger::cli {
namespace {

struct CopyCommandOptions {
  std::string stream;
  std::string to;
};

// The store at a ledger location (a folder or a PostgreSQL URI), as the other commands open it.
Result<std::unique_ptr<Store>> open_location(const std::string& location, bool for_reading) {
  if (for_reading)
    return open_store_at(location, RocksStoreOptions{.create_if_missing = false, .read_only = true});
  return open_store_at(location, RocksStoreOptions{.create_if_missing = true});
}

// A location as it may be shown: a URI's password replaced by ***.
std::string shown(const std::string& location) { return redact_uri(location); }

void print_copied(const CopyCommandOptions& o, const std::string& from, const CopySummary& copied,
                  const VerifyReport& report, bool json, std::ostream& out) {
  if (json) {
    nlohmann::ordered_json j;
    j["stream"] = o.stream;
    j["from"] = shown(from);
    j["to"] = shown(o.to);
    j["records"] = copied.records;
    j["keys"] = copied.keys;
    j["writes"] = copied.writes;
    j["leftovers_removed"] = copied.leftovers_removed;
    j["verified"] = report.ok;
    j["steps"] = report.steps;
    j["chain_hash"] = report.chain_hash;
    out << json_text(j) << '\n';
    return;
  }
  out << "copied stream " << o.stream << " from " << shown(from) << " to " << shown(o.to) << ": "
      << copied.records << " records, " << copied.keys << " keys in " << copied.writes
      << " writes; verify ok: " << report.steps << " steps, chain hash " << report.chain_hash << "\n";
}

Status run_copy(const CopyCommandOptions& o, const GlobalOptions& g, std::ostream& out) {
  if (auto s = validate_stream_name(o.stream); !s) return s.error();
  if (o.to.empty()) return invalid_input("copy --to: give the ledger location to copy into (a folder)");
  const std::string from = ledger_path(g);
  {
    // The stream must exist before anything at the target is created (the error says how to make it).
    auto source = open_for_reading(g);
    if (!source) return source.error();
    if (auto info = (*source)->status(o.stream); !info) return info.error();
  }
  auto source = open_location(from, /*for_reading=*/true);
  if (!source) return source.error();
  auto target = open_location(o.to, /*for_reading=*/false);
  if (!target) return with_message(target.error(), "copy --to: " + target.error().message);
  auto copied = copy_stream(**source, **target, o.stream);
  if (!copied) return copied.error();

  auto ledger = Ledger::open(std::move(*target));
  if (!ledger) return ledger.error();
  auto report = (*ledger)->verify(o.stream);
  if (!report) return report.error();
  if (!report->ok) {
    return conflict("the copy of stream " + o.stream + " in " + shown(o.to) + " fails verification at step " +
                        std::to_string(report->first_bad_step) + ": " + report->problem,
                    "verification_failed");
  }
  print_copied(o, from, *copied, *report, g.json, out);
  return {};
}

}  // namespace

void add_copy_command(CLI::App& app, CommandContext& ctx) {
  auto o = std::make_shared<CopyCommandOptions>();
  CLI::App* sub = app.add_subcommand(
      "copy",
      "copy one stream (its whole history) from --ledger into another ledger location, then verify the copy; "
      "the source is only read");
  sub->add_option("stream", o->stream, "stream name")->required();
  sub->add_option("--to", o->to, "the ledger location to copy into; it must not have the stream yet")
      ->required();
  sub->callback([&ctx, o] { ctx.run = [&ctx, o] { return run_copy(*o, ctx.global, std::cout); }; });
}

}  // namespace alphaledger::cli
