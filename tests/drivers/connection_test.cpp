// Connection strings: every part parsed, every bad part named, and the
// factory opening a real pseudo-terminal and a local TCP socket.
#include <gtest/gtest.h>

#include <boost/asio/ip/tcp.hpp>
#include <boost/asio/read_until.hpp>
#include <boost/asio/streambuf.hpp>
#include <boost/asio/write.hpp>
#include <chrono>
#include <thread>

#include "drivers/connection.hpp"
#include "drivers/pseudo_terminal.hpp"
#include "tests/drivers/pty_helpers.hpp"

namespace veq::drivers {
namespace {

using namespace std::chrono_literals;

SerialSettings serial(std::string_view text) {
  auto parsed = parse_connection_string(text);
  EXPECT_TRUE(parsed.has_value()) << parsed.error().message;
  EXPECT_TRUE(std::holds_alternative<SerialSettings>(*parsed));
  return std::get<SerialSettings>(*parsed);
}

/// The error message for a string that must not parse.
std::string refusal(std::string_view text) {
  auto parsed = parse_connection_string(text);
  EXPECT_FALSE(parsed.has_value()) << text;
  if (parsed.has_value())
    return {};
  EXPECT_EQ(parsed.error().kind, ErrorKind::invalid_input);
  return parsed.error().message;
}

TEST(ConnectionString, SerialWithEverySetting) {
  const auto s =
      serial("serial:/dev/pts/5?baud=9600&parity=even&data_bits=7&stop_bits=2&flow=hardware");
  EXPECT_EQ(s.device, "/dev/pts/5");
  EXPECT_EQ(s.baud_rate, 9600u);
  EXPECT_EQ(s.parity, Parity::even);
  EXPECT_EQ(s.data_bits, 7u);
  EXPECT_EQ(s.stop_bits, StopBits::two);
  EXPECT_EQ(s.flow, FlowControl::hardware);
}

TEST(ConnectionString, SerialDefaultsAre115200EightNoneOne) {
  const auto s = serial("serial:/dev/ttyUSB0");
  EXPECT_EQ(s.device, "/dev/ttyUSB0");
  EXPECT_EQ(s.baud_rate, 115200u);
  EXPECT_EQ(s.data_bits, 8u);
  EXPECT_EQ(s.parity, Parity::none);
  EXPECT_EQ(s.stop_bits, StopBits::one);
  EXPECT_EQ(s.flow, FlowControl::none);
  EXPECT_EQ(serial("serial:/dev/ttyS0?stop_bits=1.5&flow=software").stop_bits,
            StopBits::one_and_half);
}

TEST(ConnectionString, RoundTripsThroughItsText) {
  const std::string text =
      "serial:/dev/ttyUSB1?baud=921600&data_bits=8&parity=odd&stop_bits=1.5&flow=software";
  auto parsed = parse_connection_string(text);
  ASSERT_TRUE(parsed.has_value());
  EXPECT_EQ(to_connection_string(*parsed), text);
  auto tcp = parse_connection_string("tcp:192.0.2.10:4001");
  ASSERT_TRUE(tcp.has_value());
  EXPECT_EQ(to_connection_string(*tcp), "tcp:192.0.2.10:4001");
}

TEST(ConnectionString, TrafficLogOnEitherKind) {
  auto serial = parse_connection_string("serial:/dev/ttyUSB0?baud=9600&traffic_log=/tmp/b.log");
  ASSERT_TRUE(serial.has_value()) << serial.error().message;
  EXPECT_EQ(std::get<SerialSettings>(*serial).traffic_log, "/tmp/b.log");
  EXPECT_EQ(to_connection_string(*serial),
            "serial:/dev/ttyUSB0?baud=9600&data_bits=8&parity=none&stop_bits=1&flow=none&"
            "traffic_log=/tmp/b.log");
  auto tcp = parse_connection_string("tcp:192.0.2.10:4001?traffic_log=/tmp/t.log");
  ASSERT_TRUE(tcp.has_value()) << tcp.error().message;
  EXPECT_EQ(std::get<TcpSettings>(*tcp).traffic_log, "/tmp/t.log");
  EXPECT_EQ(to_connection_string(*tcp), "tcp:192.0.2.10:4001?traffic_log=/tmp/t.log");
}

TEST(ConnectionString, Tcp) {
  auto parsed = parse_connection_string("tcp:titrator-3.lab:4001?connect_timeout_ms=500");
  ASSERT_TRUE(parsed.has_value()) << parsed.error().message;
  const auto& t = std::get<TcpSettings>(*parsed);
  EXPECT_EQ(t.host, "titrator-3.lab");
  EXPECT_EQ(t.port, 4001);
  EXPECT_EQ(t.connect_timeout, 500ms);
  auto v6 = parse_connection_string("tcp:[2001:db8::10]:4001");
  ASSERT_TRUE(v6.has_value()) << v6.error().message;
  EXPECT_EQ(std::get<TcpSettings>(*v6).host, "2001:db8::10");
}

TEST(ConnectionString, EveryBadPartIsNamed) {
  struct Case {
    const char* text;
    const char* named;
  };
  const Case cases[] = {
      {"/dev/ttyUSB0", "no kind of connection"},
      {"usb:/dev/ttyUSB0", "unknown kind of connection 'usb'"},
      {"serial:", "no device path"},
      {"serial:?baud=9600", "no device path"},
      {"serial:/dev/ttyS0?baud=fast", "baud 'fast'"},
      {"serial:/dev/ttyS0?baud=0", "baud '0'"},
      {"serial:/dev/ttyS0?baud=96OO", "baud '96OO'"},
      {"serial:/dev/ttyS0?data_bits=9", "data_bits '9'"},
      {"serial:/dev/ttyS0?parity=mark", "parity 'mark'"},
      {"serial:/dev/ttyS0?stop_bits=3", "stop_bits '3'"},
      {"serial:/dev/ttyS0?flow=rts", "flow 'rts'"},
      {"serial:/dev/ttyS0?speed=9600", "unknown serial setting 'speed'"},
      {"serial:/dev/ttyS0?baud=9600&baud=19200", "'baud' is given twice"},
      {"serial:/dev/ttyS0?baud", "'baud' is not of the form name=value"},
      {"serial:/dev/ttyS0?baud=9600&", "'' is not of the form name=value"},
      {"serial:/dev/ttyS0?", "'' is not of the form name=value"},
      {"tcp:4001", "expected tcp:<host>:<port>"},
      {"tcp:lab-host:http", "port 'http'"},
      {"tcp:lab-host:70000", "port '70000'"},
      {"tcp:lab-host:4001?timeout=5", "unknown tcp setting 'timeout'"},
      {"tcp:lab-host:4001?traffic_log=", "traffic_log needs a file path"},
      {"serial:/dev/ttyS0?traffic_log=", "traffic_log needs a file path"},
  };
  for (const auto& c : cases) {
    const std::string message = refusal(c.text);
    EXPECT_NE(message.find(c.named), std::string::npos)
        << "for '" << c.text << "' the message was: " << message;
    EXPECT_NE(message.find(c.text), std::string::npos) << "the message quotes the string";
  }
}

TEST(OpenTransport, BadStringIsInvalidInputBeforeAnyPortIsTouched) {
  auto t = open_transport("serial:/dev/ttyS0?parity=maybe");
  ASSERT_FALSE(t.has_value());
  EXPECT_EQ(t.error().kind, ErrorKind::invalid_input);
}

TEST(OpenTransport, SerialOverAPseudoTerminal) {
  auto pair = PseudoTerminal::open();
  ASSERT_TRUE(pair.has_value()) << pair.error().message;
  auto t = open_transport("serial:" + pair->slave_path() + "?baud=115200&parity=none");
  ASSERT_TRUE(t.has_value()) << t.error().message;
  ASSERT_TRUE(testing::write_fd(pair->master_fd(), "1 ok *0000\n"));
  auto line = (*t)->read_line(1000ms);
  ASSERT_TRUE(line.has_value()) << line.error().message;
  EXPECT_EQ(*line, "1 ok *0000");
}

TEST(OpenTransport, TcpLinesDeadlinesAndDisconnection) {
  namespace asio = boost::asio;
  using asio::ip::tcp;
  asio::io_context io;
  tcp::acceptor acceptor(io, tcp::endpoint(asio::ip::address_v4::loopback(), 0));
  const auto port = acceptor.local_endpoint().port();
  std::thread device([&] {
    tcp::socket s = acceptor.accept();
    asio::streambuf request;
    asio::read_until(s, request, '\n');
    asio::write(s, asio::buffer(std::string("1 ok\r\n")));
    std::this_thread::sleep_for(150ms);  // silent long enough for one timeout
    s.close();
  });
  auto t = open_transport("tcp:127.0.0.1:" + std::to_string(port));
  ASSERT_TRUE(t.has_value()) << t.error().message;
  EXPECT_EQ((*t)->describe(), "tcp:127.0.0.1:" + std::to_string(port));
  ASSERT_TRUE((*t)->write_all("1 identify\n", 500ms).has_value());
  auto reply = (*t)->read_line(1000ms);
  ASSERT_TRUE(reply.has_value()) << reply.error().message;
  EXPECT_EQ(*reply, "1 ok");
  auto silent = (*t)->read_line(50ms);
  ASSERT_FALSE(silent.has_value());
  EXPECT_EQ(silent.error().kind, ErrorKind::timeout);
  auto closed = (*t)->read_line(2000ms);
  device.join();
  ASSERT_FALSE(closed.has_value());
  EXPECT_EQ(closed.error().kind, ErrorKind::disconnected) << closed.error().describe();
}

TEST(OpenTransport, TcpRefusedConnectionIsDisconnected) {
  namespace asio = boost::asio;
  // A port that was just free: bind one, note it, close it.
  asio::io_context io;
  asio::ip::tcp::acceptor probe(io, {asio::ip::address_v4::loopback(), 0});
  const auto port = probe.local_endpoint().port();
  probe.close();
  auto t = open_transport("tcp:127.0.0.1:" + std::to_string(port));
  ASSERT_FALSE(t.has_value());
  EXPECT_EQ(t.error().kind, ErrorKind::disconnected) << t.error().describe();
}

}  // namespace
}  // namespace veq::drivers
