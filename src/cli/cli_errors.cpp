// The error table of the command line and the stdin reader (cli_errors.hpp; docs/errors.md).
#include "cli/cli_errors.hpp"

#include <iostream>
#include <iterator>
#include <nlohmann/json.hpp>
#include <sstream>

#include "harness/json_text.hpp"

namespace alphaledger::cli {
namespace {

bool starts_with(std::string_view s, std::string_view prefix) { return s.substr(0, prefix.size()) == prefix; }

// A refusal's code word. The ledger reports every refusal as ErrorKind::kRefused; the finer word
// comes from the message's fixed opening (tests/cli/test_cli_errors.cpp runs each one through the
// built binary, so a change of wording in the ledger shows up there).
std::string refusal_code(const std::string& message) {
  // decide --file prefixes "FILE:LINE: " to the ledger's message; look past it.
  std::string_view m = message;
  if (const auto at = m.find(": no stream named "); at != std::string_view::npos) m = m.substr(at + 2);
  if (starts_with(m, "no stream named ")) return "unknown_stream";
  if (starts_with(m, "no ledger at ")) return "no_ledger";
  if (starts_with(m, "stream ") && m.find(" fails verification") != std::string_view::npos)
    return "verification_failed";
  return "conflict";
}

}  // namespace

Failure failure_from(const Error& e) {
  switch (e.kind) {
    case ErrorKind::kInvalidInput:
      return {2, "invalid_input", e.message};
    case ErrorKind::kRefused:
      return {3, refusal_code(e.message), e.message};
    case ErrorKind::kStorage:
      return {4, "storage", e.message};
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
  if (std::cin.bad()) return invalid_input("stdin: could not be read");
  return log;
}

}  // namespace alphaledger::cli
