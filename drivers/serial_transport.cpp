#include "drivers/serial_transport.hpp"

#include <termios.h>

#include <cerrno>
#include <utility>

#include <boost/asio/serial_port.hpp>

#include "drivers/asio_stream_transport.hpp"

namespace veq::drivers {

namespace asio = boost::asio;

const char* parity_name(Parity parity) {
  switch (parity) {
    case Parity::none:
      return "none";
    case Parity::odd:
      return "odd";
    case Parity::even:
      return "even";
  }
  return "unknown";
}

const char* stop_bits_name(StopBits stop) {
  switch (stop) {
    case StopBits::one:
      return "1";
    case StopBits::one_and_half:
      return "1.5";
    case StopBits::two:
      return "2";
  }
  return "unknown";
}

const char* flow_control_name(FlowControl flow) {
  switch (flow) {
    case FlowControl::none:
      return "none";
    case FlowControl::software:
      return "software";
    case FlowControl::hardware:
      return "hardware";
  }
  return "unknown";
}

std::string to_connection_string(const SerialSettings& s) {
  return "serial:" + s.device + "?baud=" + std::to_string(s.baud_rate) +
         "&data_bits=" + std::to_string(s.data_bits) + "&parity=" + parity_name(s.parity) +
         "&stop_bits=" + stop_bits_name(s.stop_bits) + "&flow=" + flow_control_name(s.flow) +
         (s.traffic_log.empty() ? std::string() : "&traffic_log=" + s.traffic_log);
}

namespace {

asio::serial_port::parity::type asio_parity(Parity p) {
  switch (p) {
    case Parity::odd:
      return asio::serial_port::parity::odd;
    case Parity::even:
      return asio::serial_port::parity::even;
    case Parity::none:
      break;
  }
  return asio::serial_port::parity::none;
}

asio::serial_port::stop_bits::type asio_stop_bits(StopBits s) {
  switch (s) {
    case StopBits::one_and_half:
      return asio::serial_port::stop_bits::onepointfive;
    case StopBits::two:
      return asio::serial_port::stop_bits::two;
    case StopBits::one:
      break;
  }
  return asio::serial_port::stop_bits::one;
}

asio::serial_port::flow_control::type asio_flow(FlowControl f) {
  switch (f) {
    case FlowControl::software:
      return asio::serial_port::flow_control::software;
    case FlowControl::hardware:
      return asio::serial_port::flow_control::hardware;
    case FlowControl::none:
      break;
  }
  return asio::serial_port::flow_control::none;
}

/// Bytes the kernel holds for the port but nobody read: stale replies from
/// before this host listened, or the rest of a reply we gave up on.
void flush_port_input(asio::serial_port& port) {
  if (port.is_open())
    ::tcflush(port.native_handle(), TCIFLUSH);
}

}  // namespace

Result<std::unique_ptr<Transport>> open_serial_transport(const SerialSettings& s) {
  const std::string where = "serial:" + s.device;
  if (s.device.empty())
    return make_error(ErrorKind::invalid_input, "serial port: no device path given");
  auto io = std::make_unique<asio::io_context>();
  asio::serial_port port(*io);
  boost::system::error_code ec;
  port.open(s.device, ec);
  if (ec) {
    if (ec == boost::system::errc::no_such_file_or_directory) {
      return make_error(ErrorKind::not_found,
                        where +
                            ": no such port; check the device path and that the adapter is "
                            "plugged in");
    }
    if (ec == boost::system::errc::permission_denied) {
      return make_error(ErrorKind::io, where +
                                           ": permission denied; the user needs read and "
                                           "write access to the port (on Debian: the "
                                           "dialout group)");
    }
    if (ec == boost::system::errc::inappropriate_io_control_operation) {
      return make_error(ErrorKind::invalid_input,
                        where + " is not a serial port (not a terminal device); check the path");
    }
    return make_error(ErrorKind::io, where + ": cannot open (" + ec.message() + ")");
  }
  // Each setting separately, so that the message names the one the port refused.
  auto refused = [&](const std::string& setting) {
    return make_error(ErrorKind::io, where + ": the port refused " + setting + " (" + ec.message() +
                                         "); check the setting against the "
                                         "device's manual");
  };
  port.set_option(asio::serial_port::baud_rate(s.baud_rate), ec);
  if (ec)
    return refused("baud=" + std::to_string(s.baud_rate));
  port.set_option(asio::serial_port::character_size(s.data_bits), ec);
  if (ec)
    return refused("data_bits=" + std::to_string(s.data_bits));
  port.set_option(asio::serial_port::parity(asio_parity(s.parity)), ec);
  if (ec)
    return refused(std::string("parity=") + parity_name(s.parity));
  port.set_option(asio::serial_port::stop_bits(asio_stop_bits(s.stop_bits)), ec);
  if (ec)
    return refused(std::string("stop_bits=") + stop_bits_name(s.stop_bits));
  port.set_option(asio::serial_port::flow_control(asio_flow(s.flow)), ec);
  if (ec)
    return refused(std::string("flow=") + flow_control_name(s.flow));
  flush_port_input(port);
  return std::unique_ptr<Transport>(
      std::make_unique<detail::AsioStreamTransport<asio::serial_port>>(
          std::move(io), std::move(port), where, flush_port_input));
}

}  // namespace veq::drivers
