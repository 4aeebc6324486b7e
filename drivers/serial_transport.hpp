// A serial port (RS-232 or USB adapter, or the slave side of a pseudo-terminal
// in tests) as a Transport, on Boost.Asio.
#pragma once

#include <memory>
#include <string>

#include "common/result.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

/// Parity bit of each character.
enum class Parity : int { none = 0, odd = 1, even = 2 };
/// Stop bits after each character.
enum class StopBits : int { one = 0, one_and_half = 1, two = 2 };
/// How the two ends hold each other back when a buffer is full.
enum class FlowControl : int {
  none = 0,      ///< no flow control
  software = 1,  ///< XON/XOFF characters in the data stream
  hardware = 2,  ///< RTS/CTS lines
};

const char* parity_name(Parity parity);        ///< "none", "odd", "even"
const char* stop_bits_name(StopBits stop);     ///< "1", "1.5", "2"
const char* flow_control_name(FlowControl f);  ///< "none", "software", "hardware"

/// Settings of a serial line. The defaults are veq's native protocol defaults
/// (docs/protocol.md): 115200 baud is the fastest rate every common USB
/// adapter and instrument board supports, and 8N1 without flow control is what
/// a plain three-wire cable allows.
struct SerialSettings {
  std::string device;            ///< port path, e.g. "/dev/ttyUSB0" or "/dev/pts/5"
  unsigned baud_rate = 115200;   ///< bits per second
  unsigned data_bits = 8;        ///< 5 to 8
  Parity parity = Parity::none;  ///< parity bit
  StopBits stop_bits = StopBits::one;
  FlowControl flow = FlowControl::none;
  /// File to append the line's raw traffic to (drivers/traffic_log.hpp);
  /// empty: no log. Used by open_transport(), not by open_serial_transport().
  std::string traffic_log;
};

/// "serial:/dev/ttyUSB0?baud=115200&data_bits=8&parity=none&stop_bits=1&flow=none"
std::string to_connection_string(const SerialSettings& settings);

/// Opens and configures a serial port and drops whatever the device sent
/// before we listened. Errors name the port and the setting the port refused
/// (not_found for a missing device file, io otherwise), with a hint for the
/// user. The transport's describe() is "serial:<device>".
///
/// Deadlines given to write_all() and read_line() are real time. A read that
/// times out is ErrorKind::timeout and leaves the port usable; a line closed
/// by the other end (a pulled adapter, a closed pseudo-terminal) is
/// ErrorKind::disconnected.
Result<std::unique_ptr<Transport>> open_serial_transport(const SerialSettings& settings);

}  // namespace veq::drivers
