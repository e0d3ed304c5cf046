// How the command line reports a failure (docs/errors.md): the one table from an error to its exit
// code and code word, the text and JSON forms on stderr, clear messages for usage mistakes (with
// "did you mean ...?"), and "-" as standard input for log arguments.
#pragma once

#include <CLI/CLI.hpp>
#include <optional>
#include <ostream>
#include <string>
#include <string_view>
#include <vector>

#include "alphaledger/result.hpp"
#include "alphaledger/test_log.hpp"

namespace alphaledger::cli {

// A failure as the user sees it: the process exit code, a short code word (the words of the HTTP
// service where the meaning is the same) and the message.
struct Failure {
  int exit_code = 2;
  std::string code;
  std::string message;
};

// The one mapping from a library error to exit code and code word. Every command's error goes
// through it (main.cpp), so the CLI has no other place that picks an exit code.
// The code word is the error's own code when it has one (unknown_stream, no_ledger,
// verification_failed), else the kind's:
//   kInvalidArgument -> 2 invalid_input
//   kNotFound        -> 3 not_found        kConflict -> 3 conflict
//   kCorruption      -> 4 corruption       kIOError  -> 4 storage     kBusy -> 4 busy
// The message is message_for_command_line(e).
Failure failure_from(const Error& e);
// The error's message as the command line shows it: a parameter the library names (reason
// "field", e.g. nonnull_fraction) under its flag (--nonnull-fraction), else the message followed
// by command_advice(e).
std::string message_for_command_line(const Error& e);
// The command to run next, for the errors whose reason has one (Error::reason in result.hpp):
// unknown_stream -> how to create it, closed_stream -> how to read its history, damaged_record ->
// verify, damaged_ledger -> recover, not_launched -> running/launch, running_in_batch -> decide
// alone, log_format -> the --format flag. Empty otherwise. Starts with a space.
std::string command_advice(const Error& e);
Failure usage_failure(std::string message);     // 2 usage: the command line itself is wrong
Failure internal_failure(std::string message);  // 4 internal: an unexpected failure inside the tool

// One line on `err`: "alphaledger: error: MESSAGE", or with `json` exactly one JSON object
// {"error": {"code": CODE, "message": MESSAGE}}.
void print_failure(std::ostream& err, const Failure& f, bool json);
std::string failure_json(const Failure& f);

// True when the arguments ask for --json (looked up before parsing, so that a command line that
// cannot be parsed is still answered in JSON).
bool wants_json(const std::vector<std::string>& args);

// Checks the arguments before CLI11 parses them: unknown commands and options, missing values, and
// values that are not numbers where numbers are expected (CLI11 would read "-1" for an unsigned
// option as 2^64 - 1). Returns the message of the first problem, or "" when none is found (and
// always for --help / --version).
std::string check_arguments(const CLI::App& root, const std::vector<std::string>& args);

// A message for a command line CLI11 refused: names the command, the flag or word, the value (as
// an excerpt) and what is accepted; suggests close names for unknown commands and flags. Never
// repeats CLI11's own text except as a last resort.
std::string explain_usage_error(const CLI::App& root, const std::vector<std::string>& args,
                                const CLI::ParseError& e);

// Damerau-Levenshtein (optimal string alignment) distance.
std::size_t edit_distance(std::string_view a, std::string_view b);
// The names closest to `word` (at most 3, best first), or none when nothing is close.
std::vector<std::string> closest_names(std::string_view word, const std::vector<std::string>& names);

// read_compact_log_file() for a command-line argument: "-" reads standard input, in the format
// given by `forced` or, without it, JSON Lines when the first non-blank byte is '{' and CSV
// otherwise. Standard input is read as it comes, not copied whole into memory first.
Result<CompactLog> read_log_argument(const std::string& path, std::optional<std::string_view> forced,
                                  const ReadOptions& options = {});

}  // namespace alphaledger::cli
