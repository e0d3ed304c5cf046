#include "support/temp_dir.hpp"

#include <stdlib.h>

#include <filesystem>
#include <fstream>
#include <stdexcept>
#include <system_error>

namespace alphaledger::test_support {

TempDir::TempDir() {
  std::string pattern = (std::filesystem::temp_directory_path() / "alphaledger-test-XXXXXX").string();
  if (::mkdtemp(pattern.data()) == nullptr) {
    throw std::runtime_error("cannot make a temporary folder from " + pattern);
  }
  path_ = pattern;
}

TempDir::~TempDir() {
  std::error_code ec;
  std::filesystem::remove_all(path_, ec);
}

std::string TempDir::sub(const std::string& name) const {
  return (std::filesystem::path(path_) / name).string();
}

std::string TempDir::write(const std::string& name, const std::string& text) const {
  const std::string p = sub(name);
  std::ofstream out(p, std::ios::binary);
  out << text;
  if (!out) throw std::runtime_error("cannot write " + p);
  return p;
}

}  // namespace alphaledger::test_support
