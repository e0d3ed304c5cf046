// alphaledger pipe STREAM
// alphaledger serve [--listen HOST:PORT] [--token-file F] [--threads N] [--max-body-bytes N]
//                   [--timeout-seconds S] [--access-log on|off]
#include <poll.h>
#include <signal.h>
#include <spdlog/spdlog.h>
#include <sys/stat.h>

#include <atomic>
#include <chrono>
#include <iostream>
#include <mutex>
#include <nlohmann/json.hpp>
#include <thread>

#include "alphaledger/service.hpp"
#include "alphaledger/store.hpp"
#include "cli/command.hpp"
#include "harness/json_text.hpp"
#include "service/stop_signals.hpp"

namespace alphaledger::cli {
namespace {

// The service's messages name what was wrong, not our flags; the command line says which flag
// gave the value.
Error given_with(const std::string& flag, Error e) {
  e.message += " (given with " + flag + ")";
  return e;
}

struct PipeOptions {
  std::string stream;
};

struct ServeOptions {
  std::string listen = "127.0.0.1:8742";
  std::optional<std::string> token_file;
  std::size_t threads = 32;
  std::size_t max_body_bytes = 65536;
  int timeout_seconds = 10;
  std::string access_log = "on";
};

std::int64_t now_ms() {
  return std::chrono::duration_cast<std::chrono::milliseconds>(
             std::chrono::system_clock::now().time_since_epoch())
      .count();
}

// The structured log of `serve`: one JSON object per line on stderr, lines never interleaved.
class ServiceLog {
 public:
  void write(nlohmann::ordered_json j) {
    nlohmann::ordered_json line;
    line["time"] = format_timestamp(now_ms());
    for (auto it = j.begin(); it != j.end(); ++it) line[it.key()] = it.value();
    const std::string text = json_text(line) + "\n";
    std::lock_guard<std::mutex> lock(mutex_);
    std::cerr << text;
    std::cerr.flush();
  }

 private:
  std::mutex mutex_;
};

Status run_pipe_command(const PipeOptions& o, const GlobalOptions& g, std::ostream& out) {
  auto signals = StopSignals::install();
  if (!signals) return signals.error();
  // An existing ledger only: a mistyped --ledger must not create an empty one (exit 3).
  auto ledger = Ledger::open(ledger_path(g), RocksStoreOptions{.create_if_missing = false});
  if (!ledger) return ledger.error();
  auto summary = run_pipe(**ledger, o.stream, /*in_fd=*/0, out, (*signals)->fd());
  if (!summary) return summary.error();
  spdlog::info(
      "pipe {}: {} lines, {} decided, {} launched, {} abandoned, {} looked, {} repeats, {} refused{}",
      o.stream, summary->lines, summary->decided, summary->launched, summary->abandoned, summary->looked,
      summary->repeats, summary->bad, summary->stopped ? ", stopped by a signal" : "");
  if (summary->bad > 0) {
    return invalid_input(std::to_string(summary->bad) + " of " + std::to_string(summary->lines) +
                         " lines were refused; each was answered with {\"line\": N, \"error\": \"...\"}");
  }
  return {};
}

// The HTTP options from the command line; the access log (when on) writes to `log`.
Result<HttpOptions> http_options(const ServeOptions& o, ServiceLog& log) {
  auto listen = parse_listen_address(o.listen);
  if (!listen) return given_with("--listen HOST:PORT", listen.error());
  HttpOptions options;
  options.listen = *listen;
  if (o.token_file) {
    auto token = read_token_file(*o.token_file);
    if (!token) return given_with("--token-file FILE", token.error());
    options.token = *token;
  }
  options.threads = o.threads;
  options.max_body_bytes = o.max_body_bytes;
  options.io_timeout_seconds = o.timeout_seconds;
  if (o.access_log == "on") {
    options.access_log = [&log](const AccessLogEntry& e) {
      nlohmann::ordered_json j;
      j["event"] = "request";
      j["remote"] = e.remote;
      j["method"] = e.method;
      j["path"] = e.path;
      j["status"] = e.status;
      j["bytes"] = e.bytes;
      j["ms"] = e.ms ? nlohmann::ordered_json(*e.ms) : nlohmann::ordered_json(nullptr);
      log.write(std::move(j));
    };
  }
  return options;
}

// Warnings about a readable token file or an open address without a token, then "listening".
void log_start(ServiceLog& log, const ServeOptions& o, const HttpOptions& options, int port,
               const std::string& ledger) {
  if (o.token_file) {
    struct stat st {};
    if (::stat(o.token_file->c_str(), &st) == 0 && (st.st_mode & S_IROTH) != 0) {
      log.write(
          {{"event", "warning"},
           {"message", "the token file " + *o.token_file +
                           " can be read by every user; make it private (chmod 600, or 640 with a group)"}});
    }
  }
  if (!is_loopback_host(options.listen.host) && !options.token) {
    log.write({{"event", "warning"},
               {"message",
                "listening on a non-loopback address without --token-file: anyone who can reach it can "
                "decide tests"}});
  }
  log.write({{"event", "listening"},
             {"address", options.listen.host + ":" + std::to_string(port)},
             {"ledger", ledger},
             {"auth", options.token.has_value()}});
}

// Runs `svc` until SIGTERM/SIGINT: a watcher thread stops the server; stop() is repeated until
// run() returns, in case the signal came before the server started listening.
Status run_until_stopped(HttpService& svc, StopSignals& signals, ServiceLog& log) {
  std::atomic<bool> finished{false};
  const int stop_fd = signals.fd();
  std::thread watcher([&] {
    bool stopping = false;
    while (!finished.load()) {
      pollfd p{stop_fd, POLLIN, 0};
      const int r = ::poll(&p, 1, 100);
      if (!stopping && r > 0 && (p.revents & POLLIN) != 0) {
        stopping = true;
        const int sig = signals.signal_number();
        log.write({{"event", "stopping"}, {"signal", std::string(sig == SIGINT ? "SIGINT" : "SIGTERM")}});
      }
      if (stopping) svc.stop();
    }
  });
  const Status ran = svc.run();
  finished = true;
  watcher.join();
  return ran;
}

Status run_serve_command(const ServeOptions& o, const GlobalOptions& g) {
  ServiceLog log;
  auto options = http_options(o, log);
  if (!options) return options.error();
  // Handlers before any thread exists, so no worker is ended by SIGTERM/SIGINT.
  auto signals = StopSignals::install();
  if (!signals) return signals.error();
  // An existing ledger only (create one with `alphaledger new`): exit 3 "no ledger at ...".
  auto ledger = Ledger::open(ledger_path(g), RocksStoreOptions{.create_if_missing = false});
  if (!ledger) return ledger.error();
  auto service = HttpService::create(**ledger, *options);
  if (!service) return service.error();
  auto port = (*service)->bind();
  if (!port) return port.error();
  log_start(log, o, *options, *port, (*ledger)->location());  // a URI with its password hidden
  const Status ran = run_until_stopped(**service, **signals, log);
  service->reset();  // every in-flight request has been answered
  ledger->reset();   // closes the ledger cleanly
  log.write({{"event", "stopped"}});
  return ran;
}

}  // namespace

void add_service_commands(CLI::App& app, CommandContext& ctx) {
  auto pipe_opts = std::make_shared<PipeOptions>();
  CLI::App* pipe = app.add_subcommand("pipe",
                                      "decide tests read as JSON Lines from stdin ({\"id\": ..., "
                                      "\"p_value\": ...}); one answer per line on stdout");
  pipe->add_option("stream", pipe_opts->stream, "the stream (created with `alphaledger new`)")->required();
  pipe->callback([&ctx, pipe_opts] {
    ctx.run = [&ctx, pipe_opts] { return run_pipe_command(*pipe_opts, ctx.global, std::cout); };
  });

  auto serve_opts = std::make_shared<ServeOptions>();
  CLI::App* serve = app.add_subcommand(
      "serve", "serve the ledger over HTTP/JSON (docs/http.md); stops cleanly on SIGTERM/SIGINT");
  serve->add_option(
      "--listen", serve_opts->listen,
      "HOST:PORT to listen on; default 127.0.0.1:8742 (loopback only); port 0 picks a free one");
  serve->add_option("--token-file", serve_opts->token_file,
                    "file whose first line is the bearer token every request must carry");
  serve->add_option("--threads", serve_opts->threads, "worker threads: requests handled at once; default 32")
      ->check(CLI::Range(1, 1024));
  serve
      ->add_option("--max-body-bytes", serve_opts->max_body_bytes,
                   "largest request body accepted (larger: 413); default 65536")
      ->check(CLI::Range(1, 64 << 20));
  serve
      ->add_option("--timeout-seconds", serve_opts->timeout_seconds,
                   "time allowed for a whole request (headers and body; slower: 408) and for "
                   "writing its answer; default 10")
      ->check(CLI::Range(1, 3600));
  serve
      ->add_option("--access-log", serve_opts->access_log,
                   "on or off: one JSON line per request on stderr; default on")
      ->check(CLI::IsMember({"on", "off"}));
  serve->callback([&ctx, serve_opts] {
    ctx.run = [&ctx, serve_opts] { return run_serve_command(*serve_opts, ctx.global); };
  });
}

}  // namespace alphaledger::cli
