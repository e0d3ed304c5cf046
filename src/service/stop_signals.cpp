// SIGTERM / SIGINT as a readable file descriptor: the signals are blocked (so no handler ever runs
// on some arbitrary thread) and read from a signalfd by whoever polls it.
#include "service/stop_signals.hpp"

#include <fcntl.h>
#include <signal.h>
#include <sys/signalfd.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstring>

namespace alphaledger {
namespace {

std::atomic<bool> g_installed{false};
sigset_t g_old_mask;
struct sigaction g_old_pipe;
std::atomic<int> g_signal{0};

}  // namespace

Result<std::unique_ptr<StopSignals>> StopSignals::install() {
  bool expected = false;
  if (!g_installed.compare_exchange_strong(expected, true)) {
    return busy("SIGTERM/SIGINT are already being watched in this process");
  }
  sigset_t stop_set;
  sigemptyset(&stop_set);
  sigaddset(&stop_set, SIGTERM);
  sigaddset(&stop_set, SIGINT);
  // Blocked in this thread; every thread started afterwards inherits the mask, so the signals stay
  // pending until read from the signalfd.
  if (const int e = pthread_sigmask(SIG_BLOCK, &stop_set, &g_old_mask); e != 0) {
    g_installed = false;
    return io_error(std::string("cannot block SIGTERM/SIGINT: ") + std::strerror(e));
  }
  const int fd = ::signalfd(-1, &stop_set, SFD_NONBLOCK | SFD_CLOEXEC);
  if (fd < 0) {
    const int e = errno;
    pthread_sigmask(SIG_SETMASK, &g_old_mask, nullptr);
    g_installed = false;
    return io_error(std::string("cannot watch SIGTERM/SIGINT (signalfd): ") + std::strerror(e));
  }
  struct sigaction ignore {};
  ignore.sa_handler = SIG_IGN;
  sigemptyset(&ignore.sa_mask);
  sigaction(SIGPIPE, &ignore, &g_old_pipe);
  g_signal = 0;
  std::unique_ptr<StopSignals> s(new StopSignals());
  s->read_fd_ = fd;
  return s;
}

StopSignals::~StopSignals() {
  if (read_fd_ >= 0) {
    // Take every pending SIGTERM/SIGINT first: once unblocked, a pending one would end the
    // process with the default action instead of the clean exit already under way.
    signalfd_siginfo info{};
    while (::read(read_fd_, &info, sizeof info) == static_cast<ssize_t>(sizeof info)) {
    }
    ::close(read_fd_);
  }
  sigaction(SIGPIPE, &g_old_pipe, nullptr);
  pthread_sigmask(SIG_SETMASK, &g_old_mask, nullptr);
  g_installed = false;
}

int StopSignals::signal_number() const {
  if (g_signal.load() == 0 && read_fd_ >= 0) {
    signalfd_siginfo info{};
    if (::read(read_fd_, &info, sizeof info) == static_cast<ssize_t>(sizeof info)) {
      int expected = 0;
      g_signal.compare_exchange_strong(expected, static_cast<int>(info.ssi_signo));
    }
  }
  return g_signal.load();
}

}  // namespace alphaledger
