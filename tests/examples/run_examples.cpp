// Runs every runnable example of the public headers (extracted into header_examples_generated.hpp
// by extract_examples.py) inside a fresh scratch folder, so the examples' relative paths
// ("alphaledger.db", "replay_data/...") neither touch the tree nor depend on the caller's folder.
// An example fails by throwing (a Result read without a value throws std::bad_variant_access).
#include <stdlib.h>
#include <unistd.h>

#include <exception>
#include <filesystem>
#include <iostream>
#include <string>

#include "header_examples_generated.hpp"

int main() {
  namespace fs = std::filesystem;
  std::string scratch = (fs::temp_directory_path() / "alphaledger-examples-XXXXXX").string();
  if (::mkdtemp(scratch.data()) == nullptr) {
    std::cerr << "cannot make a scratch folder\n";
    return 1;
  }
  fs::create_directory_symlink(fs::path(ALPHALEDGER_SOURCE_DIR) / "replay_data", fs::path(scratch) / "replay_data");
  fs::current_path(scratch);
  int failed = 0;
  for (const auto& example : alphaledger::header_examples::kRunnable) {
    std::cout << "example " << example.where << '\n';
    try {
      example.run();
    } catch (const std::exception& e) {
      std::cerr << "example " << example.where << " failed: " << e.what() << '\n';
      ++failed;
    }
  }
  fs::current_path(fs::temp_directory_path());
  std::error_code ec;
  fs::remove_all(scratch, ec);
  std::cout << alphaledger::header_examples::kRunnable.size() << " examples run, " << failed << " failed\n";
  return failed == 0 ? 0 : 1;
}
