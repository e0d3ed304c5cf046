// Messages for command lines that cannot be parsed (cli_errors.hpp; docs/errors.md).
//
// When CLI11 refuses a command line, its own text ("A subcommand is required", "Could not convert:
// --alpha = abc", "The following argument was not expected: ...") names neither what is accepted
// nor what was probably meant. So the arguments are walked again here, the way the parser reads
// them (subcommands, options of the command and of its parents, values, positionals), and the
// first problem found is described in our words. CLI11's exception type is used only when the walk
// finds nothing (a missing required option, a value its checks refused).
#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstring>
#include <map>

#include "alphaledger/text.hpp"
#include "cli/cli_errors.hpp"

namespace alphaledger::cli {
namespace {

bool has_prefix(std::string_view s, std::string_view prefix) { return s.substr(0, prefix.size()) == prefix; }

// "alphaledger plan means"
std::string command_path(const CLI::App* app) {
  std::vector<std::string> names;
  // The root's name is argv[0] once parsed and "" before: always say "alphaledger".
  for (const CLI::App* a = app; a != nullptr; a = a->get_parent())
    names.push_back(a->get_parent() == nullptr ? "alphaledger" : a->get_name());
  std::string path;
  for (auto it = names.rbegin(); it != names.rend(); ++it) {
    if (!path.empty()) path += ' ';
    path += *it;
  }
  return path;
}

std::string help_hint(const CLI::App* app) { return " (see '" + command_path(app) + " --help')"; }

std::vector<const CLI::App*> subcommands_of(const CLI::App* app) {
  return app->get_subcommands([](const CLI::App* s) { return !s->get_name().empty(); });
}

std::vector<std::string> subcommand_names(const CLI::App* app) {
  std::vector<std::string> names;
  for (const CLI::App* s : subcommands_of(app)) names.push_back(s->get_name());
  return names;
}

const CLI::App* find_subcommand(const CLI::App* app, const std::string& name) {
  for (const CLI::App* s : subcommands_of(app)) {
    if (s->check_name(name)) return s;
  }
  return nullptr;
}

// Options are looked up in the command and then its parents (the app falls through to them).
const CLI::Option* find_option(const std::vector<const CLI::App*>& chain, const std::string& name) {
  for (auto it = chain.rbegin(); it != chain.rend(); ++it) {
    if (const CLI::Option* o = (*it)->get_option_no_throw(name); o != nullptr) return o;
  }
  return nullptr;
}

std::vector<std::string> option_names(const std::vector<const CLI::App*>& chain) {
  std::vector<std::string> names;
  for (const CLI::App* app : chain) {
    for (const CLI::Option* o : app->get_options()) {
      if (o->get_positional() && o->get_lnames().empty()) continue;
      for (const auto& l : o->get_lnames()) names.push_back("--" + l);
    }
  }
  return names;
}

std::string joined(const std::vector<std::string>& names, std::string_view last_sep = " or ") {
  std::string out;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (i > 0) out += i + 1 == names.size() ? std::string(last_sep) : std::string(", ");
    out += names[i];
  }
  return out;
}

std::string value_in_quotes(std::string_view value) { return "'" + excerpt(value) + "'"; }

std::string suggestion(std::string_view word, const std::vector<std::string>& names) {
  const auto close = closest_names(word, names);
  if (close.empty()) return "";
  std::vector<std::string> q;
  for (const auto& c : close) q.push_back("'" + c + "'");
  return "; did you mean " + joined(q) + "?";
}

// "--alpha" for options, "FILE" for positionals.
std::string option_label(const CLI::Option* o) {
  if (!o->get_lnames().empty()) return "--" + o->get_lnames().front();
  std::string name = o->get_name();
  std::transform(name.begin(), name.end(), name.begin(), [](unsigned char c) { return std::toupper(c); });
  return name;
}

std::string accepted(const CLI::Option* o) {
  const std::string& d = o->get_description();
  return d.empty() ? std::string() : " (" + d + ")";
}

// CLI11's type name without the checks it appends ("TEXT:{csv,jsonl}" -> "TEXT").
std::string base_type(const CLI::Option* o) {
  std::string t = o->get_type_name();
  return t.substr(0, t.find(':'));
}

bool is_finite_number(std::string_view v) {
  if (!v.empty() && v.front() == '+') v.remove_prefix(1);
  return read_finite_number(v).has_value();
}

// Plain decimal digits. CLI11 reads integers with strtoull(..., 0), where "-1" wraps to 2^64 - 1,
// "010" is octal 8 and "0x10" is 16; none of those is what a person meant, so they are refused
// here, before CLI11 sees them.
bool is_whole(std::string_view v, bool allow_sign) {
  if (allow_sign && !v.empty() && v.front() == '-') v.remove_prefix(1);
  if (v.size() > 1 && v.front() == '0') return false;
  return !v.empty() && std::all_of(v.begin(), v.end(), [](char c) { return c >= '0' && c <= '9'; });
}

// A word that CLI11 reads as a value or positional, not as an option: "-", "-5", "-0.3".
bool looks_like_option(std::string_view t) {
  if (t.size() < 2 || t.front() != '-') return false;
  if (t == "--") return false;
  const char c = t[1];
  return !(c >= '0' && c <= '9') && c != '.';
}

// Checks a value against the option's type; "" when it is fine.
std::string value_problem(const CLI::Option* o, std::string_view value) {
  const std::string type = base_type(o);
  const std::string label = option_label(o);
  if (type == "FLOAT[,FLOAT...]") {  // one number, or a comma-separated list of them (simulate sweeps)
    if (value.find(',') == std::string_view::npos) {
      if (!is_finite_number(value))
        return label + " must be a finite number, got " + value_in_quotes(value) + accepted(o);
      return "";
    }
    for (std::size_t start = 0;;) {
      const std::size_t comma = value.find(',', start);
      if (!is_finite_number(value.substr(start, comma == std::string_view::npos ? comma : comma - start)))
        return label + " must be a finite number or a comma-separated list of finite numbers, got " +
               value_in_quotes(value) + accepted(o);
      if (comma == std::string_view::npos) return "";
      start = comma + 1;
    }
  }
  if ((type == "FLOAT" || type == "NUMBER") && !is_finite_number(value))
    return label + " must be a finite number, got " + value_in_quotes(value) + accepted(o);
  if (type == "INT" && !is_whole(value, true))
    return label + " must be a whole number (decimal digits), got " + value_in_quotes(value) + accepted(o);
  if (type == "UINT" && !is_whole(value, false))
    return label + " must be a whole number >= 0 (decimal digits), got " + value_in_quotes(value) +
           accepted(o);
  return "";
}

struct Walk {
  std::vector<const CLI::App*> chain;  // root ... deepest command named on the line
  std::string problem;                 // the first problem found, or ""
};

// Reads the arguments the way the parser does and stops at the first problem it can name.
Walk walk_arguments(const CLI::App& root, const std::vector<std::string>& args) {
  Walk w;
  w.chain.push_back(&root);
  std::map<const CLI::Option*, int> seen;
  std::map<const CLI::App*, std::size_t> positionals_used;
  bool only_positionals = false;
  for (std::size_t i = 0; i < args.size(); ++i) {
    const std::string& tok = args[i];
    const CLI::App* cur = w.chain.back();
    if (!only_positionals && tok == "--") {
      only_positionals = true;
      continue;
    }
    if (!only_positionals && looks_like_option(tok)) {
      const auto eq = tok.find('=');
      const bool long_form = has_prefix(tok, "--");
      const std::string name = long_form && eq != std::string::npos ? tok.substr(0, eq) : tok;
      const CLI::Option* o = find_option(w.chain, name);
      if (o == nullptr) {
        w.problem = "unknown option " + value_in_quotes(name) + " for '" + command_path(cur) + "'" +
                    suggestion(name, option_names(w.chain)) + help_hint(cur);
        return w;
      }
      if (o->get_expected_max() == 0) continue;  // a flag
      std::string value;
      if (long_form && eq != std::string::npos) {
        value = tok.substr(eq + 1);
      } else if (i + 1 < args.size() &&
                 !(looks_like_option(args[i + 1]) &&
                   find_option(w.chain, args[i + 1].substr(0, args[i + 1].find('='))) != nullptr)) {
        value = args[++i];
      } else {
        w.problem = option_label(o) + " needs a value" + accepted(o);
        return w;
      }
      if (++seen[o] > 1 && o->get_multi_option_policy() == CLI::MultiOptionPolicy::Throw &&
          o->get_expected_max() <= 1) {
        w.problem = option_label(o) + " was given more than once; give it once";
        return w;
      }
      if (auto p = value_problem(o, value); !p.empty()) {
        w.problem = p;
        return w;
      }
      continue;
    }
    if (!only_positionals) {
      if (const CLI::App* sub = find_subcommand(cur, tok); sub != nullptr) {
        w.chain.push_back(sub);
        continue;
      }
    }
    // A positional of the current command, or a word that is not a command.
    std::size_t capacity = 0;
    for (const CLI::Option* o : cur->get_options([](const CLI::Option* o) { return o->get_positional(); }))
      capacity += static_cast<std::size_t>(std::max(1, o->get_items_expected_max()));
    if (positionals_used[cur] < capacity) {
      ++positionals_used[cur];
      continue;
    }
    const auto names = subcommand_names(cur);
    if (!names.empty()) {
      const std::string close = suggestion(tok, names);
      w.problem = "unknown command " + value_in_quotes(tok) +
                  (cur == &root ? std::string() : " for '" + command_path(cur) + "'") +
                  (close.empty() ? "; commands: " + joined(names, ", ") : close) + help_hint(cur);
    } else {
      w.problem =
          "unexpected argument " + value_in_quotes(tok) + " for '" + command_path(cur) + "'" + help_hint(cur);
    }
    return w;
  }
  return w;
}

// The deepest command CLI11 selected while parsing.
const CLI::App* deepest_parsed(const CLI::App& root) {
  const CLI::App* app = &root;
  while (true) {
    const auto parsed = app->get_subcommands([](const CLI::App* s) { return s->parsed(); });
    const CLI::App* next = nullptr;
    for (const CLI::App* s : parsed) {
      if (!s->get_name().empty()) next = s;
    }
    if (next == nullptr) return app;
    app = next;
  }
}

std::string missing_required(const CLI::App* app) {
  for (const CLI::App* a = app; a != nullptr; a = a->get_parent()) {
    for (const CLI::Option* o : a->get_options()) {
      if (o->get_required() && o->count() == 0) {
        return option_label(o) + " is required by '" + command_path(app) + "'" + accepted(o) + help_hint(app);
      }
    }
  }
  return "";
}

}  // namespace

std::size_t edit_distance(std::string_view a, std::string_view b) {
  const std::size_t n = a.size(), m = b.size();
  std::vector<std::vector<std::size_t>> d(n + 1, std::vector<std::size_t>(m + 1, 0));
  for (std::size_t i = 0; i <= n; ++i) d[i][0] = i;
  for (std::size_t j = 0; j <= m; ++j) d[0][j] = j;
  for (std::size_t i = 1; i <= n; ++i) {
    for (std::size_t j = 1; j <= m; ++j) {
      const std::size_t cost = a[i - 1] == b[j - 1] ? 0 : 1;
      d[i][j] = std::min({d[i - 1][j] + 1, d[i][j - 1] + 1, d[i - 1][j - 1] + cost});
      if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1])
        d[i][j] = std::min(d[i][j], d[i - 2][j - 2] + 1);
    }
  }
  return d[n][m];
}

std::vector<std::string> closest_names(std::string_view word, const std::vector<std::string>& names) {
  // Dashes are not letters the user mistyped: compare "--sumary" with "--summary" as words.
  auto bare = [](std::string_view s) {
    while (!s.empty() && s.front() == '-') s.remove_prefix(1);
    return s;
  };
  const std::string_view w = bare(word);
  if (w.empty() || w.size() > 64) return {};
  // Up to one edit in 4 letters (at least 1, at most 3); a name that starts with the word counts
  // as close, so "stat" finds "status" and "stats".
  const std::size_t limit = std::clamp<std::size_t>(w.size() / 4 + (w.size() >= 3 ? 1 : 0), 1, 3);
  std::vector<std::pair<std::size_t, std::string>> scored;
  for (const auto& name : names) {
    const std::string_view n = bare(name);
    std::size_t d = edit_distance(w, n);
    if (w.size() >= 3 && has_prefix(n, w)) d = std::min<std::size_t>(d, 1);
    if (d <= limit) scored.emplace_back(d, name);
  }
  std::stable_sort(scored.begin(), scored.end(),
                   [](const auto& x, const auto& y) { return x.first < y.first; });
  std::vector<std::string> out;
  for (const auto& [d, name] : scored) {
    if (std::find(out.begin(), out.end(), name) != out.end()) continue;
    if (!out.empty() && d > scored.front().first) break;  // only the best distance
    out.push_back(name);
    if (out.size() == 3) break;
  }
  return out;
}

std::string check_arguments(const CLI::App& root, const std::vector<std::string>& args) {
  for (const auto& a : args) {
    if (a == "--") break;
    if (a == "-h" || a == "--help" || a == "--version") return "";  // the parser answers these
  }
  return walk_arguments(root, args).problem;
}

std::string explain_usage_error(const CLI::App& root, const std::vector<std::string>& args,
                                const CLI::ParseError& e) {
  const Walk w = walk_arguments(root, args);
  if (!w.problem.empty()) return w.problem;
  const CLI::App* cur = w.chain.back();
  if (cur->get_require_subcommand_min() > 0) {
    const auto names = subcommand_names(cur);
    return (cur == &root ? std::string("no command given") : "'" + command_path(cur) + "' needs a command") +
           "; commands: " + joined(names, ", ") + help_hint(cur);
  }
  if (dynamic_cast<const CLI::RequiredError*>(&e) != nullptr) {
    if (auto m = missing_required(deepest_parsed(root)); !m.empty()) return m;
    if (auto m = missing_required(cur); !m.empty()) return m;
  }
  if (dynamic_cast<const CLI::ValidationError*>(&e) != nullptr ||
      dynamic_cast<const CLI::ConversionError*>(&e) != nullptr) {
    // CLI11 names the option first ("--format: ..."): find it and show the value it refused.
    const std::string what = e.what();
    const auto colon = what.find(':');
    const std::string name = what.substr(0, colon);
    for (auto it = w.chain.rbegin(); it != w.chain.rend(); ++it) {
      if (const CLI::Option* o = (*it)->get_option_no_throw(name); o != nullptr) {
        std::string value;
        if (!o->results().empty()) value = o->results().back();
        // The checks' own descriptions ("INT in [1 - 1024]", "{csv,jsonl}") say what is accepted.
        const std::string type = o->get_type_name();
        const auto checks = type.find(':');
        return option_label(o) + ": " + value_in_quotes(value) + " is not accepted" +
               (checks == std::string::npos ? std::string() : "; accepted: " + type.substr(checks + 1)) +
               accepted(o);
      }
    }
  }
  // Nothing more specific is known: CLI11's text, shortened, with the way to the help.
  return "the command line could not be read: " + excerpt(e.what(), 160) + help_hint(cur);
}

}  // namespace alphaledger::cli
