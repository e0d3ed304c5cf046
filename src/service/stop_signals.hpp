// Process-wide signal handling for `pipe` and `serve` (project-internal: a library user's process
// owns its signals; this is the command line's way of stopping cleanly).
#pragma once

#include <memory>

#include "alphaledger/result.hpp"

namespace alphaledger {

// SIGTERM and SIGINT as a readable file descriptor, for loops that poll(). install() blocks the
// two signals and watches them with a signalfd, so no handler runs on an arbitrary thread; the fd
// becomes readable when one arrives. While the object exists the signals no longer end the
// process; the destructor takes any still pending and restores the previous mask. Also ignores
// SIGPIPE, so a closed reader shows up as a write error. Only one may exist at a time (kBusy
// otherwise). REQUIRES: install() is called before the process starts other threads (threads
// inherit the mask from their creator; one started earlier could still be ended by the signal).
class StopSignals {
 public:
  static Result<std::unique_ptr<StopSignals>> install();
  ~StopSignals();
  StopSignals(const StopSignals&) = delete;
  StopSignals& operator=(const StopSignals&) = delete;
  int fd() const { return read_fd_; }  // becomes readable on the first SIGTERM/SIGINT
  // The signal received (SIGTERM or SIGINT), or 0 while none has arrived. Reading it takes the
  // signal from the fd.
  int signal_number() const;

 private:
  StopSignals() = default;
  int read_fd_ = -1;
};

}  // namespace alphaledger
