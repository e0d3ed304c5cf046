// `alphaledger --ledger DIR serve --listen 127.0.0.1:0 ...` as a background process, waiting (at
// most 20 s) for the "listening" line that names the port it bound. For tests that link the store.
#pragma once

#include <doctest/doctest.h>

#include <chrono>
#include <csignal>
#include <filesystem>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "alphaledger/ledger.hpp"
#include "support/process.hpp"
#include "support/text.hpp"

namespace alphaledger::test_support {

class ServerProcess {
 public:
  ServerProcess(const std::string& ledger_dir, const std::string& log_file,
                std::vector<std::string> extra = {}) {
    // `serve` refuses a folder without a ledger: make an empty one first (as `new` would).
    if (!std::filesystem::exists(ledger_dir)) {
      auto made = Ledger::open(ledger_dir);
      REQUIRE_MESSAGE(made.ok(), (made.ok() ? "" : made.error().message));
    }
    std::vector<std::string> args = {"--ledger", ledger_dir, "serve", "--listen", "127.0.0.1:0"};
    for (auto& e : extra) args.push_back(e);
    child_ = std::make_unique<BackgroundProcess>(
        args, BackgroundProcess::Io{"/dev/null", log_file + ".out", log_file});
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
    while (port_ == 0) {
      for (const auto& line : split_lines(read_file(log_file))) {
        auto j = nlohmann::json::parse(line, nullptr, false);
        if (!j.is_discarded() && j.is_object() && j.value("event", "") == "listening") {
          const std::string address = j.value("address", "");
          port_ = std::stoi(address.substr(address.rfind(':') + 1));
        }
      }
      if (port_ != 0) break;
      if (auto code = child_->wait(std::chrono::milliseconds(1))) {
        FAIL("the server exited with code " << *code << " before listening: " << read_file(log_file));
      }
      REQUIRE_MESSAGE(std::chrono::steady_clock::now() < deadline, "the server did not start within 20 s");
      std::this_thread::sleep_for(std::chrono::milliseconds(10));
    }
  }
  int port() const { return port_; }
  BackgroundProcess& child() { return *child_; }

  // SIGTERM and wait: the exit code of a graceful stop (nullopt if it did not stop in 30 s).
  std::optional<int> stop() {
    child_->signal(SIGTERM);
    return child_->wait(std::chrono::seconds(30));
  }

 private:
  std::unique_ptr<BackgroundProcess> child_;
  int port_ = 0;
};

}  // namespace alphaledger::test_support
