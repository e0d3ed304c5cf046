// The error table of the command line and the stdin reader (cli_errors.hpp; docs/errors.md).
#include "cli/cli_errors.hpp"

#include <algorithm>
#include <iostream>
#include <iterator>
#include <nlohmann/json.hpp>
#include <sstream>

#include "harness/json_text.hpp"

namespace alphaledger::cli {

std::string command_advice(const Error& e) {
  // Lower layers say what happened; the command to run next is the command line's to say.
  if (e.subject.empty()) return {};
  if (e.reason == "unknown_stream") return " (create it first: alphaledger new " + e.subject + " --rule RULE)";
  if (e.reason == "closed_stream") return " (its history stays readable: alphaledger history " + e.subject + ")";
  if (e.reason == "damaged_record") return " (run alphaledger verify " + e.subject + ")";
  if (e.reason == "not_launched") {
    return " (the running tests: alphaledger running " + e.subject + "; launch one with: alphaledger launch " +
           e.subject + " --id ID)";
  }
  if (e.reason == "log_format") return " (--format csv|jsonl)";
  if (e.reason == "running_in_batch") return " (alphaledger decide " + e.subject + " --id ID --p P)";
  if (e.reason == "damaged_ledger") {
    return " Copy what can be proven into a new folder with: alphaledger --ledger " + e.subject +
           " recover --to NEWDIR (docs/ledger.md \"Damaged files\")";
  }
  return {};
}

std::string message_for_command_line(const Error& e) {
  // A parameter the library names nonnull_fraction is the flag --nonnull-fraction here.
  if (e.reason == "field" && !e.subject.empty() && e.message.starts_with(e.subject + " ")) {
    std::string flag = e.subject;
    std::replace(flag.begin(), flag.end(), '_', '-');
    return "--" + flag + e.message.substr(e.subject.size());
  }
  return e.message + command_advice(e);
}

Failure failure_from(const Error& e) {
  // The one mapping of error kinds to exit codes (docs/errors.md); the word is code_word().
  const auto with = [&](int exit_code) { return Failure{exit_code, code_word(e), message_for_command_line(e)}; };
  switch (e.kind) {
    case ErrorKind::kInvalidArgument:
      return with(2);
    case ErrorKind::kNotFound:
    case ErrorKind::kConflict:
      return with(3);
    case ErrorKind::kCorruption:
    case ErrorKind::kIOError:
    case ErrorKind::kBusy:
      return with(4);
  }
  return internal_failure(e.message);
}

Failure usage_failure(std::string message) { return {2, "usage", std::move(message)}; }
Failure internal_failure(std::string message) { return {4, "internal", std::move(message)}; }

std::string failure_json(const Failure& f) {
  // The shape of error_json (alphaledger/forms.hpp), built here because this file is also compiled
  // into the CLI test without the service layer. json_text: bytes that are not UTF-8 (in a path,
  // say) never throw.
  nlohmann::ordered_json j;
  j["error"]["code"] = f.code;
  j["error"]["message"] = f.message;
  return json_text(j);
}

void print_failure(std::ostream& err, const Failure& f, bool json) {
  if (json) {
    err << failure_json(f) << '\n';
  } else {
    err << "alphaledger: error: " << f.message << '\n';
  }
  err.flush();
}

bool wants_json(const std::vector<std::string>& args) {
  for (const auto& a : args) {
    if (a == "--") return false;
    if (a == "--json") return true;
  }
  return false;
}

namespace {

// Standard input with the blank bytes already taken from it (to find the format) put back in front.
class PrefixedInput : public std::streambuf {
 public:
  PrefixedInput(std::string prefix, std::streambuf& rest) : prefix_(std::move(prefix)), rest_(rest) {
    setg(prefix_.data(), prefix_.data(), prefix_.data() + prefix_.size());
  }

 protected:
  int_type underflow() override {
    if (gptr() < egptr()) return traits_type::to_int_type(*gptr());
    const std::streamsize n = rest_.sgetn(block_, sizeof block_);
    if (n <= 0) return traits_type::eof();
    setg(block_, block_, block_ + n);
    return traits_type::to_int_type(*gptr());
  }

 private:
  std::string prefix_;
  std::streambuf& rest_;
  char block_[1 << 16];
};

}  // namespace

Result<CompactLog> read_log_argument(const std::string& path, std::optional<std::string_view> forced,
                                     const ReadOptions& options) {
  if (path != "-") return read_compact_log_file(path, forced, options);
  std::streambuf& in = *std::cin.rdbuf();
  std::string blank;
  LogFormat format = LogFormat::kCsv;
  if (forced) {
    auto f = log_format_for("stdin", forced);
    if (!f) return f.error();
    format = *f;
  } else {
    for (int c = in.sgetc(); c != std::char_traits<char>::eof(); c = in.snextc()) {
      if (c != ' ' && c != '\t' && c != '\r' && c != '\n') {
        if (c == '{') format = LogFormat::kJsonLines;
        break;
      }
      blank.push_back(static_cast<char>(c));
    }
  }
  PrefixedInput buffer(std::move(blank), in);
  std::istream stream(&buffer);
  auto log = read_compact_log(stream, "stdin", format, options);
  if (std::cin.bad()) return invalid_input("stdin: could not be read");  // exit 2 as before
  return log;
}

}  // namespace alphaledger::cli
