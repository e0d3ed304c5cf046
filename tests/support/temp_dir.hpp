// The one temporary-folder helper of the tests: a fresh folder under the system temp folder,
// removed with everything in it when the object goes out of scope.
#pragma once

#include <string>

namespace alphaledger::test_support {

class TempDir {
 public:
  // Throws std::runtime_error if the folder cannot be made (doctest reports it as a failure).
  TempDir();
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;

  const std::string& path() const { return path_; }
  // The path of `name` inside the folder (nothing is created).
  std::string sub(const std::string& name) const;
  std::string file(const std::string& name) const { return sub(name); }
  // Writes `text` (bytes as given) to `name` inside the folder and returns its path.
  std::string write(const std::string& name, const std::string& text) const;

 private:
  std::string path_;
};

}  // namespace alphaledger::test_support
