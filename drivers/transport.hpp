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
