// Load benchmark for the PostgreSQL ledger backend: durable decisions per second through `serve`,
// RocksDB against PostgreSQL with one replica and with two replicas, in one run.
//
// Each scenario gets a fresh ledger (a new folder, or a new database made with psql) and fresh
// servers on free loopback ports (--access-log off, clients + 4 worker threads each). C clients
// (1, 8, 32 by default) decide new tests over keep-alive connections, each on its own stream
// ("distinct") or all on one stream ("shared"); with two replicas, client c talks to replica c % 2.
// A request answered 5xx or not at all is counted as failed and not retried (none are expected).
// Prints per scenario: backend, replicas, streams, clients, decisions, seconds, decisions/s, p50,
// p99 and max latency in ms (client side), failed requests.
//
// Usage: pg_load --pg URI [--binary PATH] [--folder DIR] [--decisions N] [--clients 1,8,32]
//                [--psql PATH]
//   --pg         URI of a PostgreSQL role that may create databases (bench/pg_bench.sh starts a
//                throwaway cluster and passes it); the password is never printed
//   --binary     the alphaledger executable (default: the one built with this benchmark)
//   --folder     where the RocksDB ledgers and logs go (default ./pg-load.tmp; created, removed)
//   --decisions  decisions per scenario, split over the clients (default 2000)
//   --psql       psql program used to create and drop the databases (default: psql)
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
#include <memory>
#include <nlohmann/json.hpp>
#include <random>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

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
  std::string folder = "pg-load.tmp";
  std::string pg;
  std::string psql = "psql";
  std::size_t decisions = 2000;
  std::vector<int> clients = {1, 8, 32};
};

// Runs a command to its end; dies with its stderr (which must not hold the password) on failure.
void run(const std::vector<std::string>& args, const std::string& dir, const std::string& what) {
  if (wait_exit(spawn(args, dir + "/run.out", dir + "/run.err")) != 0)
    die(what + " failed: " + slurp(dir + "/run.err"));
}

std::string with_database(const std::string& uri, const std::string& db) {
  const auto scheme = uri.find("://");
  const auto path = uri.find('/', scheme + 3);
  const auto query = uri.find('?');
  std::string out = uri.substr(0, path == std::string::npos ? query : path) + "/" + db;
  if (query != std::string::npos) out += uri.substr(query);
  return out;
}

double percentile(const std::vector<double>& sorted, double q) {
  if (sorted.empty()) return 0;
  return sorted[std::min(sorted.size() - 1,
                         static_cast<std::size_t>(q * static_cast<double>(sorted.size() - 1) + 0.5))];
}

struct Scenario {
  const char* backend;  // "rocksdb" or "postgresql"
  int replicas;
  bool shared;
  int clients;
};

void run_scenario(const Options& o, const Scenario& s, int round) {
  const std::string dir = o.folder + "/s" + std::to_string(round);
  std::filesystem::create_directories(dir);
  const bool pg = std::string(s.backend) == "postgresql";
  const std::string dbname = "pg_load_" + std::to_string(::getpid()) + "_" + std::to_string(round);
  const std::string ledger = pg ? with_database(o.pg, dbname) : dir + "/db";
  if (pg)
    run({o.psql, "-X", "-q", "-d", o.pg, "-c", "CREATE DATABASE " + dbname}, dir, "creating a database");
  // The streams, made with the CLI before the servers start (the first also creates the schema).
  const int streams = s.shared ? 1 : s.clients;
  for (int k = 0; k < streams; ++k) {
    run({o.binary, "--ledger", ledger, "new", "s" + std::to_string(k), "--rule", "lord++"}, dir,
        "alphaledger new");
  }
  std::vector<std::unique_ptr<ServeProcess>> servers;
  const auto threads = static_cast<std::size_t>(s.clients) + 4;
  for (int r = 0; r < s.replicas; ++r) {
    const std::string log = dir + "/server" + std::to_string(r) + ".log";
    servers.push_back(std::make_unique<ServeProcess>(o.binary, ledger, log + ".out", log, threads, 30));
  }
  const std::size_t per_client = std::max<std::size_t>(1, o.decisions / static_cast<std::size_t>(s.clients));
  std::vector<std::vector<double>> latency(static_cast<std::size_t>(s.clients));
  std::atomic<int> failures{0};
  std::atomic<bool> go{false};
  std::vector<std::thread> threads_;
  for (int c = 0; c < s.clients; ++c) {
    threads_.emplace_back([&, c] {
      auto cli = client(servers[static_cast<std::size_t>(c % s.replicas)]->port());
      std::mt19937_64 rng(static_cast<std::uint64_t>(1000 + c));
      std::uniform_real_distribution<double> unif(0.0, 1.0);
      const std::string path = "/v1/streams/s" + std::to_string(s.shared ? 0 : c) + "/tests";
      auto& lat = latency[static_cast<std::size_t>(c)];
      while (!go.load()) std::this_thread::yield();
      for (std::size_t n = 0; n < per_client; ++n) {
        nlohmann::json body = {{"id", "c" + std::to_string(c) + "-" + std::to_string(n)},
                               {"p_value", unif(rng)}};
        const auto t0 = SteadyClock::now();
        auto r = cli->Post(path.c_str(), body.dump(), "application/json");
        lat.push_back(std::chrono::duration<double, std::milli>(SteadyClock::now() - t0).count());
        if (!r || r->status != 201) ++failures;
      }
    });
  }
  const auto t0 = SteadyClock::now();
  go = true;
  for (auto& t : threads_) t.join();
  const double secs = std::chrono::duration<double>(SteadyClock::now() - t0).count();
  for (auto& server : servers) server->stop();
  std::vector<double> all;
  for (auto& l : latency) all.insert(all.end(), l.begin(), l.end());
  std::sort(all.begin(), all.end());
  std::printf("%-11s %8d %-9s %7d %9zu %8.2f %12.0f %9.2f %9.2f %9.2f %6d\n", s.backend, s.replicas,
              s.shared ? "shared" : "distinct", s.clients, all.size(), secs,
              static_cast<double>(all.size()) / secs, percentile(all, 0.5), percentile(all, 0.99),
              all.empty() ? 0.0 : all.back(), failures.load());
  std::fflush(stdout);
  if (pg)
    run({o.psql, "-X", "-q", "-d", o.pg, "-c", "DROP DATABASE " + dbname + " WITH (FORCE)"}, dir, "dropping");
}

std::vector<int> parse_list(const std::string& text) {
  std::vector<int> out;
  std::stringstream ss(text);
  std::string item;
  while (std::getline(ss, item, ',')) {
    const int v = std::atoi(item.c_str());
    if (v < 1 || v > 256) die("--clients takes numbers in [1, 256], got '" + item.substr(0, 20) + "'");
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
    else if (a == "--pg")
      o.pg = value();
    else if (a == "--psql")
      o.psql = value();
    else if (a == "--decisions")
      o.decisions = std::strtoull(value().c_str(), nullptr, 10);
    else if (a == "--clients")
      o.clients = parse_list(value());
    else
      die("unknown option " + a.substr(0, 40) + " (see the comment at the top of bench/pg_load.cpp)");
  }
  if (o.pg.empty()) die("--pg URI is required (bench/pg_bench.sh starts a cluster and passes it)");
  if (o.decisions == 0) die("--decisions must be at least 1");
  if (std::filesystem::exists(o.folder)) die(o.folder + " exists; give a new --folder");
  std::filesystem::create_directories(o.folder);
  std::printf("pg_load: %zu decisions per scenario, %u hardware threads\n", o.decisions,
              std::thread::hardware_concurrency());
  std::printf("%-11s %8s %-9s %7s %9s %8s %12s %9s %9s %9s %6s\n", "backend", "replicas", "streams",
              "clients", "decisions", "seconds", "decisions/s", "p50 ms", "p99 ms", "max ms", "failed");
  int round = 0;
  for (const bool shared : {false, true}) {
    for (const int c : o.clients) {
      run_scenario(o, {"rocksdb", 1, shared, c}, round++);
      run_scenario(o, {"postgresql", 1, shared, c}, round++);
      run_scenario(o, {"postgresql", 2, shared, c}, round++);
    }
  }
  std::filesystem::remove_all(o.folder);
  return 0;
}
