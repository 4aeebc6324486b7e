// Connection strings: one line of text that says which transport reaches a
// device and how it is set up, so that a device client never knows whether it
// sits on a serial port or a network socket.
//
//   serial:<device path>[?<name>=<value>[&<name>=<value>...]]
//       names: baud (bits per second), data_bits (5-8), parity (none, odd,
//       even), stop_bits (1, 1.5, 2), flow (none, software, hardware);
//       unset names keep the SerialSettings defaults (115200, 8, none, 1, none).
//   tcp:<host>:<port>[?connect_timeout_ms=<ms>]
//   either kind also takes traffic_log=<file>: append the line's raw traffic,
//   with timestamps, to that file (drivers/traffic_log.hpp); the path may not
//   contain '&'.
//
// Example: "serial:/dev/ttyUSB0?baud=9600&parity=even"
#pragma once

#include <memory>
#include <string>
#include <string_view>
#include <variant>

#include "common/result.hpp"
#include "drivers/serial_transport.hpp"
#include "drivers/tcp_transport.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

/// A parsed connection string.
using ConnectionSettings = std::variant<SerialSettings, TcpSettings>;

/// Parses a connection string. Errors are ErrorKind::invalid_input and quote
/// the string and the part that is wrong (the kind, a name, a value).
Result<ConnectionSettings> parse_connection_string(std::string_view text);

/// The connection string of parsed settings, every setting spelt out.
std::string to_connection_string(const ConnectionSettings& settings);

/// Opens the transport a connection string names. The transport can be
/// reopened after a disconnection (drivers/reopening_transport.hpp), and logs
/// its traffic if the string asks for a traffic log.
Result<std::unique_ptr<Transport>> open_transport(std::string_view connection_string);
/// Opens the transport for parsed settings.
Result<std::unique_ptr<Transport>> open_transport(const ConnectionSettings& settings);

}  // namespace veq::drivers
