// Load benchmark for `alphaledger serve`: durable decisions per second over HTTP and their latency.
//
// What it measures (each scenario on a fresh ledger folder and a fresh server on a free loopback
// port, started from the built binary with --access-log off and enough worker threads):
//   1. HTTP, distinct streams: C concurrent clients (C = 1, 8, 32, 64 by default), each deciding new
//      tests on its own stream (LORD++, defaults) over one keep-alive connection. Different streams
//      proceed in parallel; each request waits for its own synced write.
//   2. HTTP, one stream: the same clients all deciding on one shared stream; the server's group
//      commit lets waiting requests share one synced write.
//   3. CLI, for comparison: one `alphaledger decide` process per decision (open the ledger, decide,
//      sync, close), the durable rate a shell loop gets.
// Prints the set-up, then per scenario: clients, decisions, seconds, decisions/s, and the latency
// percentiles p50 / p99 / max in milliseconds (client side, request sent to answer read), the
// slowest first request of a client (it includes connecting, so a dropped connection attempt,
// retried by TCP after 1 s, shows there) and how many requests took 1 s or more.
//
// Usage: load_http [--binary PATH] [--folder DIR] [--decisions N] [--clients 1,8,32,64] [--cli N]
//   --binary     the alphaledger executable (default: the one built with this benchmark)
//   --folder     where the ledger folders go (default ./load-http.tmp; created and removed); put it
//                on the disk you want to measure
//   --decisions  decisions per HTTP scenario, split over the clients (default 4000)
//   --launch     launches instead of decisions: each request launches a new test (group commit of
//                launches goes through the same queue as decisions)
//   --cli        decisions for the CLI scenario (default 200; 0 skips it)
#include <fcntl.h>
#include <httplib.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <random>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "serve_process.hpp"

namespace {

using alphaledger_bench::client;
using alphaledger_bench::die;
using alphaledger_bench::ServeProcess;
using alphaledger_bench::slurp;
using alphaledger_bench::spawn;
using alphaledger_bench::wait_exit;
using SteadyClock = std::chrono::steady_clock;

struct Options {
  std::string binary = ALPHALEDGER_BINARY;
  std::string folder = "load-http.tmp";
  std::size_t decisions = 4000;
  bool launch = false;  // --launch: each request launches a new test (POST .../launches)
  std::vector<int> clients = {1, 8, 32, 64};
  std::size_t cli = 200;
};

bool progress_on() { return ::isatty(2) != 0; }

// A server on a fresh ledger; stopped with SIGTERM by stop().
ServeProcess start_server(const Options& o, const std::string& dir, std::size_t threads) {
  // `serve` opens an existing ledger only: make the empty one first (closed again at once).
  if (!alphaledger::Ledger::open(dir + "/db").ok()) die("cannot create the ledger in " + dir + "/db");
  return ServeProcess(o.binary, dir + "/db", dir + "/server.out", dir + "/server.log", threads, 20);
}

void create_stream(int port, const std::string& name) {
  auto c = client(port);
  auto r =
      c->Post("/v1/streams", nlohmann::json{{"name", name}, {"rule", "lord++"}}.dump(), "application/json");
  if (!r || r->status != 201) die("cannot create stream " + name);
}

double percentile(std::vector<double>& sorted, double q) {
  if (sorted.empty()) return 0;
  const std::size_t k =
      std::min(sorted.size() - 1, static_cast<std::size_t>(q * static_cast<double>(sorted.size() - 1) + 0.5));
  return sorted[k];
}

void print_row(const char* what, int clients, std::size_t n, double secs, std::vector<double> lat_ms,
               double first_max_ms) {
  std::sort(lat_ms.begin(), lat_ms.end());
  const auto slow = std::count_if(lat_ms.begin(), lat_ms.end(), [](double ms) { return ms >= 1000.0; });
  std::printf("%-22s %7d %9zu %8.2f %12.0f %9.2f %9.2f %9.2f %9.2f %5ld\n", what, clients, n, secs,
              static_cast<double>(n) / secs, percentile(lat_ms, 0.50), percentile(lat_ms, 0.99),
              lat_ms.empty() ? 0.0 : lat_ms.back(), first_max_ms, static_cast<long>(slow));
  std::fflush(stdout);
}

void http_scenario(const Options& o, int clients, bool one_stream, int round) {
  const std::string dir = o.folder + "/http-" + std::to_string(round);
  std::filesystem::create_directories(dir);
  ServeProcess server = start_server(o, dir, static_cast<std::size_t>(std::max(clients, 8)) + 4);
  if (one_stream) {
    create_stream(server.port(), "shared");
  } else {
    for (int c = 0; c < clients; ++c) create_stream(server.port(), "s" + std::to_string(c));
  }
  const std::size_t per_client = std::max<std::size_t>(1, o.decisions / static_cast<std::size_t>(clients));
  std::vector<std::vector<double>> latency(static_cast<std::size_t>(clients));
  std::atomic<int> failures{0};
  std::atomic<bool> go{false};
  std::vector<std::thread> threads;
  for (int c = 0; c < clients; ++c) {
    threads.emplace_back([&, c] {
      auto cli = client(server.port());
      std::mt19937_64 rng(static_cast<std::uint64_t>(1000 + c));
      std::uniform_real_distribution<double> unif(0.0, 1.0);
      const std::string path =
          "/v1/streams/" + (one_stream ? std::string("shared") : "s" + std::to_string(c)) +
          (o.launch ? "/launches" : "/tests");
      auto& lat = latency[static_cast<std::size_t>(c)];
      lat.reserve(per_client);
      while (!go.load()) std::this_thread::yield();
      for (std::size_t n = 0; n < per_client; ++n) {
        nlohmann::json body;
        body["id"] = "c" + std::to_string(c) + "-" + std::to_string(n);
        if (!o.launch) body["p_value"] = unif(rng);
        const auto t0 = SteadyClock::now();
        auto r = cli->Post(path.c_str(), body.dump(), "application/json");
        lat.push_back(std::chrono::duration<double, std::milli>(SteadyClock::now() - t0).count());
        if (!r || r->status != 201) ++failures;
      }
    });
  }
  const auto t0 = SteadyClock::now();
  go = true;
  for (auto& t : threads) t.join();
  const double secs = std::chrono::duration<double>(SteadyClock::now() - t0).count();
  server.stop();
  if (failures > 0) die(std::to_string(failures.load()) + " requests failed");
  std::vector<double> all;
  double first_max = 0;
  for (auto& l : latency) {
    if (!l.empty()) first_max = std::max(first_max, l.front());
    all.insert(all.end(), l.begin(), l.end());
  }
  print_row(one_stream ? "http, one stream" : "http, distinct streams", clients, all.size(), secs, all,
            first_max);
}

void cli_scenario(const Options& o) {
  const std::string dir = o.folder + "/cli";
  std::filesystem::create_directories(dir);
  const std::string db = dir + "/db";
  if (wait_exit(spawn({o.binary, "--ledger", db, "new", "shell", "--rule", "lord++"}, dir + "/out",
                      dir + "/err")) != 0) {
    die("alphaledger new failed: " + slurp(dir + "/err"));
  }
  std::mt19937_64 rng(7);
  std::uniform_real_distribution<double> unif(0.0, 1.0);
  std::vector<double> lat;
  const auto t0 = SteadyClock::now();
  for (std::size_t n = 0; n < o.cli; ++n) {
    char p[32];
    std::snprintf(p, sizeof p, "%.6f", unif(rng));
    const auto t1 = SteadyClock::now();
    const int code = wait_exit(
        spawn({o.binary, "--ledger", db, "decide", "shell", "--id", "t" + std::to_string(n), "--p", p},
              dir + "/out", dir + "/err"));
    lat.push_back(std::chrono::duration<double, std::milli>(SteadyClock::now() - t1).count());
    if (code != 0) die("alphaledger decide failed: " + slurp(dir + "/err"));
  }
  const double secs = std::chrono::duration<double>(SteadyClock::now() - t0).count();
  print_row("cli, one process each", 1, o.cli, secs, lat, lat.empty() ? 0.0 : lat.front());
}

std::vector<int> parse_list(const std::string& text) {
  std::vector<int> out;
  std::stringstream ss(text);
  std::string item;
  while (std::getline(ss, item, ',')) {
    const int v = std::atoi(item.c_str());
    if (v < 1 || v > 1024) die("--clients takes numbers in [1, 1024], got '" + item + "'");
    out.push_back(v);
  }
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  Options o;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto value = [&]() -> std::string {
      if (i + 1 >= argc) die(a + " needs a value");
      return argv[++i];
    };
    if (a == "--binary")
      o.binary = value();
    else if (a == "--folder")
      o.folder = value();
    else if (a == "--decisions")
      o.decisions = std::strtoull(value().c_str(), nullptr, 10);
    else if (a == "--clients")
      o.clients = parse_list(value());
    else if (a == "--launch")
      o.launch = true;
    else if (a == "--cli")
      o.cli = std::strtoull(value().c_str(), nullptr, 10);
    else
      die("unknown option " + a + " (see the comment at the top of bench/load_http.cpp)");
  }
  if (o.decisions == 0) die("--decisions must be at least 1");
  if (std::filesystem::exists(o.folder)) die(o.folder + " exists; give a new --folder");
  std::filesystem::create_directories(o.folder);
  std::printf("load_http: binary %s, folder %s, %zu decisions per HTTP scenario, %u hardware threads\n",
              o.binary.c_str(), o.folder.c_str(), o.decisions, std::thread::hardware_concurrency());
  std::printf("%-22s %7s %9s %8s %12s %9s %9s %9s %9s %5s\n", "scenario", "clients", "decisions", "seconds",
              "decisions/s", "p50 ms", "p99 ms", "max ms", "first ms", ">=1s");
  int round = 0;
  for (const bool one_stream : {false, true}) {
    for (int c : o.clients) {
      if (progress_on())
        std::fprintf(stderr, "  %s, %d clients...\n", one_stream ? "one stream" : "distinct streams", c);
      http_scenario(o, c, one_stream, round++);
    }
  }
  if (o.cli > 0) cli_scenario(o);
  std::filesystem::remove_all(o.folder);
  return 0;
}
