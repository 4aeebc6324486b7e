#include "drivers/tcp_transport.hpp"

#include <utility>

#include <boost/asio/connect.hpp>
#include <boost/asio/ip/tcp.hpp>

#include "drivers/asio_stream_transport.hpp"

namespace veq::drivers {

namespace asio = boost::asio;
using asio::ip::tcp;

namespace {
/// "tcp:<host>:<port>", an IPv6 address in brackets so that its colons stay
/// apart from the port's.
std::string address_of(const TcpSettings& s) {
  const bool v6 = s.host.find(':') != std::string::npos;
  return "tcp:" + (v6 ? "[" + s.host + "]" : s.host) + ":" + std::to_string(s.port);
}
}  // namespace

std::string to_connection_string(const TcpSettings& s) {
  std::string text = address_of(s);
  std::string query;
  if (s.connect_timeout != TcpSettings{}.connect_timeout)
    query += "connect_timeout_ms=" + std::to_string(s.connect_timeout.count());
  if (!s.traffic_log.empty())
    query += (query.empty() ? "" : "&") + std::string("traffic_log=") + s.traffic_log;
  return query.empty() ? text : text + "?" + query;
}

namespace {

/// Reads and drops what the socket holds at once, without waiting.
void drop_socket_input(tcp::socket& socket) {
  boost::system::error_code ec;
  std::array<char, 512> sink;
  while (socket.is_open() && socket.available(ec) > 0 && !ec)
    socket.read_some(asio::buffer(sink), ec);
}

}  // namespace

Result<std::unique_ptr<Transport>> open_tcp_transport(const TcpSettings& s) {
  const std::string where = address_of(s);
  if (s.host.empty())
    return make_error(ErrorKind::invalid_input, "tcp connection: no host given");
  if (s.port == 0)
    return make_error(ErrorKind::invalid_input, where + ": port 0 cannot be connected to");
  auto io = std::make_unique<asio::io_context>();
  boost::system::error_code ec;
  tcp::resolver resolver(*io);
  const auto endpoints = resolver.resolve(s.host, std::to_string(s.port), ec);
  if (ec) {
    return make_error(ErrorKind::not_found,
                      where + ": cannot find host '" + s.host + "' (" + ec.message() + ")");
  }
  tcp::socket socket(*io);
  asio::steady_timer timer(*io);
  bool timed_out = false;
  boost::system::error_code connect_ec;
  timer.expires_after(s.connect_timeout);
  timer.async_wait([&](const boost::system::error_code& e) {
    if (!e) {
      timed_out = true;
      boost::system::error_code ignored;
      socket.close(ignored);
    }
  });
  asio::async_connect(socket, endpoints,
                      [&](const boost::system::error_code& e, const tcp::endpoint&) {
                        connect_ec = e;
                        timer.cancel();
                      });
  io->run();
  if (timed_out) {
    return make_error(ErrorKind::timeout, where + ": no connection within " +
                                              std::to_string(s.connect_timeout.count()) +
                                              " ms; check the address and that the device is on");
  }
  if (connect_ec) {
    return make_error(ErrorKind::disconnected,
                      where + ": cannot connect (" + connect_ec.message() +
                          "); check the address and that the device is on");
  }
  // Request/reply lines are small: send each at once instead of waiting to
  // fill a packet (Nagle's algorithm would add up to 40 ms per exchange).
  socket.set_option(tcp::no_delay(true), ec);
  drop_socket_input(socket);
  return std::unique_ptr<Transport>(std::make_unique<detail::AsioStreamTransport<tcp::socket>>(
      std::move(io), std::move(socket), where, drop_socket_input));
}

}  // namespace veq::drivers
