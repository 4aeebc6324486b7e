// The byte-moving interface every device client talks through: an in-memory
// pair for tests and virtual time, a serial port or TCP socket for real lines.
#pragma once

#include <chrono>
#include <cstddef>
#include <string>
#include <string_view>

#include "common/result.hpp"
#include "drivers/line_framing.hpp"

namespace veq::drivers {

/// Longest line a transport accepts before it calls the input garbled (bytes).
inline constexpr std::size_t kMaxLineBytes = 1024;

/// Moves bytes to and from one device. Implementations never return an empty
/// or short line on timeout: a timeout is an ErrorKind::timeout error.
class Transport {
 public:
  virtual ~Transport() = default;
  /// Where this transport goes, for messages: "memory:burette", "serial:/dev/pts/3".
  virtual std::string describe() const = 0;
  /// Sends all bytes or fails (disconnected, timeout, io).
  virtual Result<void> write_all(std::string_view bytes, std::chrono::milliseconds timeout) = 0;
  /// Receives one line, without its terminator ("\n", a preceding "\r" is dropped).
  virtual Result<std::string> read_line(std::chrono::milliseconds timeout) = 0;
  /// Drops bytes already received but not yet read (after a timeout, say).
  virtual void discard_input() = 0;
  /// Now on the time base the timeouts of write_all() and read_line() count
  /// in (ns since an origin of the transport's choosing): real steady-clock
  /// time on a line to a device (serial port, TCP), the run's clock in
  /// memory. A link that waits for one reply over several read_line() calls
  /// counts what is left of its deadline on this time base, never on a
  /// scaled run clock: at 50x, 300 ms of run time is only 6 ms of real time,
  /// which one stall of a loaded machine's scheduler outlasts. Every
  /// transport says which (no default): one that wraps another hands on the
  /// inner one's, so a wrapper cannot silently switch a memory line to real
  /// time.
  virtual std::chrono::nanoseconds deadline_now() const = 0;
  /// What is left until `deadline` (a deadline_now() value plus a timeout),
  /// in whole milliseconds: the timeout to hand to the next read_line().
  std::chrono::milliseconds time_left(std::chrono::nanoseconds deadline) const {
    return std::chrono::duration_cast<std::chrono::milliseconds>(deadline - deadline_now());
  }
  /// Real steady-clock time: the deadline_now() of a line to a device.
  static std::chrono::nanoseconds real_time_now() {
    return std::chrono::steady_clock::now().time_since_epoch();
  }

  /// Sets the bytes that end a received line (see drivers/line_framing.hpp):
  /// "\n" by default, as veq's native protocol wants; a device profile sets
  /// its instrument's ("\r", "\r\n"...). Transports that cannot change it
  /// accept only "\n" and refuse anything else as ErrorKind::invalid_input.
  virtual Result<void> set_line_end(std::string_view terminator);
  /// The bytes that end a received line.
  virtual std::string line_end() const { return std::string(kNativeLineEnd); }

  /// Opens the line again after it was found closed (a pulled cable, a
  /// converter that dropped its TCP connection). Bytes in flight are lost.
  /// Transports that cannot reopen say so as ErrorKind::disconnected.
  virtual Result<void> reopen();
};

}  // namespace veq::drivers
