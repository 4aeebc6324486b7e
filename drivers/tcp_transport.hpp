// A raw TCP connection (an instrument on the network, or a serial-to-Ethernet
// converter) as a Transport, on Boost.Asio.
#pragma once

#include <chrono>
#include <cstdint>
#include <memory>
#include <string>

#include "common/result.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

struct TcpSettings {
  std::string host;        ///< name or address, e.g. "192.0.2.10" or "titrator-3.lab"
  std::uint16_t port = 0;  ///< TCP port
  /// Longest wait for the connection (ms). 3 s covers a slow network and a
  /// converter waking up, yet tells the user quickly that nothing is there.
  std::chrono::milliseconds connect_timeout{3000};
  /// File to append the line's raw traffic to (drivers/traffic_log.hpp);
  /// empty: no log. Used by open_transport(), not by open_tcp_transport().
  std::string traffic_log;
};

/// "tcp:host:port"
std::string to_connection_string(const TcpSettings& settings);

/// Resolves the host and connects within the connect timeout. The transport's
/// describe() is "tcp:<host>:<port>"; deadlines are real time, as on a serial
/// line; a connection closed by the other end is ErrorKind::disconnected.
Result<std::unique_ptr<Transport>> open_tcp_transport(const TcpSettings& settings);

}  // namespace veq::drivers
