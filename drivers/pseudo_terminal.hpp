// A pseudo-terminal pair: a serial line inside one machine. The master side
// plays the device (the simulator, a test, a benchmark's echo); a host opens
// the slave path like any serial port.
#pragma once

#include <string>

#include "common/result.hpp"

namespace veq::drivers {

class PseudoTerminal {
 public:
  /// Opens a new pair (posix_openpt, grantpt, unlockpt, ptsname). The slave
  /// side is set to raw mode at once, so that nothing the master writes is
  /// echoed back or turned into signals before a host configures the port.
  static Result<PseudoTerminal> open();

  PseudoTerminal(PseudoTerminal&& other) noexcept;
  PseudoTerminal& operator=(PseudoTerminal&& other) noexcept;
  PseudoTerminal(const PseudoTerminal&) = delete;
  PseudoTerminal& operator=(const PseudoTerminal&) = delete;
  /// Closes the master (the host's port then reads as disconnected) and the
  /// slave held open here.
  ~PseudoTerminal();

  /// Path a host opens as its serial port, e.g. "/dev/pts/7".
  const std::string& slave_path() const { return slave_path_; }
  /// Master file descriptor (blocking, close-on-exec); -1 once released.
  int master_fd() const { return master_fd_; }
  /// Hands the master descriptor over (to a Boost.Asio stream_descriptor,
  /// say); the caller closes it from then on.
  int release_master();
  /// Closes the master now: the host's port reads as disconnected.
  void close_master();

 private:
  PseudoTerminal(int master_fd, int slave_fd, std::string slave_path);

  int master_fd_ = -1;
  /// The slave side stays open here for the pair's whole life: when the last
  /// slave descriptor closes, Linux hangs the master up, so a host that closes
  /// its port and opens it again would otherwise find the line dead, and the
  /// master would read as endlessly "ready" with nothing to read.
  int slave_fd_ = -1;
  std::string slave_path_;
};

}  // namespace veq::drivers
