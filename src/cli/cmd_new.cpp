// alphaledger new STREAM --rule RULE [rule flags] [--alternative DIR]
#include <iostream>

#include "alphaledger/forms.hpp"
#include "cli/ledger_common.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger::cli {
namespace {

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
    out << stream_created_json(created->info, created->created) << '\n';
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

}  // namespace

void add_new_command(CLI::App& app, CommandContext& ctx) {
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

}  // namespace alphaledger::cli
