// Decisions as a long-lived process: `pipe` (JSON Lines on stdin/stdout) and `serve` (HTTP/JSON),
// both over one open Ledger and with the CLI's guarantees: every answered decision is durable
// before it is written out, each test id is decided once per stream, and a retry (same id, same
// p-value) gets the stored decision back with repeat = true. docs/http.md is the user guide.
//
// Example (pipe; compiled only: it reads standard input until it ends):
//   auto ledger = Ledger::open("alphaledger.db");
//   auto summary = run_pipe(**ledger, "checkout-team", /*in_fd=*/0, std::cout, /*stop_fd=*/-1);
//   // stdin  {"id": "exp-0142", "p_value": 0.0004}
//   // stdout {"step":1,"id":"exp-0142","p_value":0.0004,"level":0.0013703860574...,...}
//   //        (the decision_json() of forms.hpp, the same line `decide --json` prints)
//
// Example (HTTP; compiled only: run() blocks):
//   auto ledger = Ledger::open("alphaledger.db");
//   HttpOptions options;                      // 127.0.0.1:8742, no token
//   auto service = HttpService::create(**ledger, options);
//   auto port = (*service)->bind();           // the port actually bound (useful with port 0)
//   (*service)->run();                        // blocks until stop() (e.g. from a signal watcher)
//
// Thread-safety: DecisionQueue and HttpService may be used from many threads; stop() may be
// called from any thread. run_pipe is single-threaded. Nothing here owns the Ledger: it must
// outlive every object that refers to it.
#pragma once

#include <cstddef>
#include <cstdint>
#include <functional>
#include <memory>
#include <mutex>
#include <optional>
#include <ostream>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "alphaledger/result.hpp"

namespace alphaledger {

// ---- Requests given as JSON text ---------------------------------------------------------------
// (The forms the service writes are in alphaledger/forms.hpp.)

// A test read from JSON text holding one object {"id": ..., "p_value": ...}, by the one reading of
// test_record_from_json_text (alphaledger/test_log.hpp, docs/formats.md): id a string (or an
// integer, taken as its decimal text) passing validate_test_id; p_value a JSON number in [0, 1].
// Other keys are ignored. Errors are kInvalidArgument naming the field, an excerpt of the value and
// what is accepted (text that is not one JSON object is refused first, as parse_json_object
// refuses it: depth, duplicate keys, numbers a double cannot hold).
Result<TestInput> test_from_json_text(std::string_view text);

// The body of a stream creation (POST /v1/streams): name and rule (strings) plus the optional
// rule parameters (numbers: alpha, initial_wealth, candidate_threshold, discard_threshold,
// payout; strings: spending, evaluation, alternative; null means absent). Unknown keys are refused, so a
// misspelt parameter cannot silently fall back to its default. The spec is not yet checked
// against the rule: resolve_config() does that.
struct StreamRequest {
  std::string name;
  RuleSpec spec;
  // The direction of summary rows (`alternative`: two-sided, greater or less), as `new` takes it.
  Alternative alternative = Alternative::kTwoSided;
};
inline constexpr std::string_view kStreamRequestExample =
    R"({"name": "checkout-team", "rule": "lord++", "alpha": 0.05})";
// A stream creation read from JSON text holding one object.
Result<StreamRequest> stream_request_from_json_text(std::string_view text);

// ---- Deciding many tests in arrival order ----------------------------------------------------

// Decides `tests` on `stream` in order, with as few synced writes as the ledger allows: runs of
// inputs without a repeated id go to Ledger::decide_batch together; a conflict or invalid input
// answers that input only and the rest carry on. Returns one entry per input, in order. After
// the first storage failure nothing more is tried: that input holds the error and every later
// entry is std::nullopt (not attempted, so not decided).
std::vector<std::optional<Result<DecideResult>>> decide_in_order(Ledger& ledger, std::string_view stream,
                                                                 const std::vector<TestInput>& tests,
                                                                 std::size_t max_group = 256);

// Applies mixed events (decides, launches, abandons) in order with Ledger::apply_events, at most
// max_group per synced write. One entry per input, in order; after the first storage failure every
// later group is not tried (std::nullopt: not done).
std::vector<std::optional<Result<EventOutcome>>> apply_in_order(Ledger& ledger, std::string_view stream,
                                                                const std::vector<EventInput>& events,
                                                                std::size_t max_group = 256);

// Group commit for concurrent callers: decide(), launch() and abandon() from many threads; requests for one stream are
// queued and the thread that finds the stream idle decides everything queued (decide_in_order),
// so N waiting clients share one synced write. Different streams proceed in parallel.
// Thread-safety: safe from many threads.
class DecisionQueue {
 public:
  // Default max_group: 256 (one batch never holds more than this many tests).
  explicit DecisionQueue(Ledger& ledger, std::size_t max_group = 256);
  ~DecisionQueue();
  DecisionQueue(const DecisionQueue&) = delete;
  DecisionQueue& operator=(const DecisionQueue&) = delete;

  // As Ledger::decide. REQUIRES: the caller has validated id and p_value (validate_test_id,
  // validate_p_value), so one bad input cannot fail a shared batch.
  // With e_value, the number is an e-value (Ledger::decide_e; e-lond streams).
  Result<DecideResult> decide(const std::string& stream, const std::string& id, double p_value,
                              bool e_value = false);
  // As Ledger::launch and Ledger::abandon, queued with the decides (Ledger::apply_events).
  // REQUIRES: the caller has validated id.
  Result<LaunchResult> launch(const std::string& stream, const std::string& id);
  Result<AbandonResult> abandon(const std::string& stream, const std::string& id);

  // Streams with a lane right now. A lane exists only while a decide() on its stream is queued or
  // running, so names seen once (unknown ones included) cost nothing afterwards.
  std::size_t lane_count() const;

 private:
  struct Lane;
  Result<EventOutcome> submit(const std::string& stream, const EventInput& event);
  Lane& acquire(const std::string& stream);
  void release(const std::string& stream);

  Ledger& ledger_;
  std::size_t max_group_;
  mutable std::mutex lanes_mutex_;
  std::unordered_map<std::string, std::unique_ptr<Lane>> lanes_;
};

// ---- pipe --------------------------------------------------------------------------------------

struct PipeSummary {
  std::uint64_t lines = 0;      // lines answered
  std::uint64_t decided = 0;    // new decisions (a finish of a launched test included)
  std::uint64_t launched = 0;   // new launches ("event": "launch")
  std::uint64_t abandoned = 0;  // new abandons ("event": "abandon")
  std::uint64_t looked = 0;     // new looks that said continue ("event": "look"; a stop counts as decided)
  std::uint64_t repeats = 0;    // retries answered with the stored decision, launch or abandon
  std::uint64_t bad = 0;        // lines answered with {"line": N, "error": "..."}
  bool stopped = false;         // stopped by stop_fd before the end of input
};

// Reads JSON Lines from `in_fd` (lines end with LF, CRLF or a lone CR; each line is read as a
// JSON Lines row of docs/formats.md, summary rows in the stream's frozen direction) until end of
// input (or until `stop_fd`, if >= 0, becomes readable), and writes one line per input line to `out`, flushed
// per line, in input order: the decision object (decision_json, alphaledger/forms.hpp) or {"line": N,
// "error": "..."}. Lines are counted from 1; every line is answered, a blank one too. Lines that arrive
// together are decided with one synced write per group; each answer is written only after its decision is
// durable. On stop, every complete line already read is answered; a line without its newline yet is not.
// Returns the summary; an unknown stream is kNotFound before anything is read; a storage failure
// answers the line it hit and returns that error (later lines are not read); a failed write to
// `out` returns kIOError. Bad lines are not errors of the call: see PipeSummary::bad.
// Lines longer than kMaxPipeLineBytes are answered with an error.
inline constexpr std::size_t kMaxPipeLineBytes = 1 << 20;
Result<PipeSummary> run_pipe(Ledger& ledger, std::string_view stream, int in_fd, std::ostream& out,
                             int stop_fd = -1);

// ---- serve -------------------------------------------------------------------------------------

struct ListenAddress {
  std::string host;  // IPv4 dotted quad or "localhost"
  int port = 0;      // 0: any free port (see HttpService::bind)
};
// "HOST:PORT" (or ":PORT" for 127.0.0.1). Errors name the text and the accepted form.
Result<ListenAddress> parse_listen_address(std::string_view text);
bool is_loopback_host(std::string_view host);

// The bearer token from a file: its first line without surrounding white space. Errors
// (kInvalidArgument): unreadable, empty, or holding characters outside visible ASCII.
Result<std::string> read_token_file(const std::string& path);

// One line of the access log (written by the caller, e.g. as JSON on stderr).
struct AccessLogEntry {
  std::string remote;  // "127.0.0.1:53122"
  std::string method;
  std::string path;
  int status = 0;
  std::size_t bytes = 0;     // response body bytes
  std::optional<double> ms;  // handling time, when known
};

struct HttpOptions {
  ListenAddress listen{"127.0.0.1", 8742};  // Default: 127.0.0.1:8742
  std::optional<std::string> token;         // Default: none (no authentication)
  std::size_t max_body_bytes = 65536;       // Default: 64 KiB; larger bodies get 413
  int io_timeout_seconds = 10;              // Default: 10 (a whole request, headers and body; 408 after)
  int keep_alive_seconds = 5;               // Default: 5 (idle keep-alive connections close)
  std::size_t threads = 32;                 // Default: 32 worker threads (requests handled at once)
  std::size_t max_connections = 4096;       // Default: 4096 open connections; more are closed at once
  std::function<void(const AccessLogEntry&)> access_log;  // Default: none
};

// The HTTP/JSON service (routes, errors and limits in docs/http.md).
class HttpService {
 public:
  // Validates the options (kInvalidArgument: threads 0, max body 0, max connections 0, bad timeouts).
  static Result<std::unique_ptr<HttpService>> create(Ledger& ledger, HttpOptions options);
  virtual ~HttpService() = default;

  // Binds the listening socket; returns the port bound. kBusy when the address is in use (another
  // process listens there, even another `serve`), kIOError when it cannot be bound otherwise (not
  // local, permission), naming it.
  virtual Result<int> bind() = 0;
  // Serves until stop(); in-flight requests are finished before it returns.
  // REQUIRES: bind() succeeded.
  virtual Status run() = 0;
  // Safe from any thread (also before run() starts, in which case run() returns at once).
  virtual void stop() = 0;
  // Streams with a decision queue lane right now (DecisionQueue::lane_count; for tests).
  virtual std::size_t queue_lanes() const = 0;
};

}  // namespace alphaledger
