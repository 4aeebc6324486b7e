// The serial-port transport, byte by byte, against the master side of a
// pseudo-terminal played by the test itself.
#include <gtest/gtest.h>

#include <chrono>
#include <memory>
#include <thread>

#include "drivers/pseudo_terminal.hpp"
#include "drivers/serial_transport.hpp"
#include "tests/drivers/pty_helpers.hpp"

namespace veq::drivers {
namespace {

using namespace std::chrono_literals;
using testing::read_fd;
using testing::write_fd;

class SerialTransportTest : public ::testing::Test {
 protected:
  void SetUp() override {
    auto pair = PseudoTerminal::open();
    ASSERT_TRUE(pair.has_value()) << pair.error().message;
    pty_ = std::make_unique<PseudoTerminal>(std::move(pair).value());
    SerialSettings settings;
    settings.device = pty_->slave_path();
    auto opened = open_serial_transport(settings);
    ASSERT_TRUE(opened.has_value()) << opened.error().message;
    port_ = std::move(opened).value();
  }

  int master() const { return pty_->master_fd(); }

  std::unique_ptr<PseudoTerminal> pty_;
  std::unique_ptr<Transport> port_;
};

TEST_F(SerialTransportTest, DescribesItselfByDevicePath) {
  EXPECT_EQ(port_->describe(), "serial:" + pty_->slave_path());
}

TEST_F(SerialTransportTest, WriteAllPutsExactBytesOnTheLine) {
  const std::string bytes = "12 status *ABCD\n";
  ASSERT_TRUE(port_->write_all(bytes, 500ms).has_value());
  EXPECT_EQ(read_fd(master(), bytes.size(), 1000ms), bytes);
}

TEST_F(SerialTransportTest, ReadsLinesAndDropsCarriageReturn) {
  ASSERT_TRUE(write_fd(master(), "first\r\nsecond\nthird\r\n"));
  auto a = port_->read_line(1000ms);
  auto b = port_->read_line(1000ms);
  auto c = port_->read_line(1000ms);
  ASSERT_TRUE(a && b && c);
  EXPECT_EQ(*a, "first");
  EXPECT_EQ(*b, "second");
  EXPECT_EQ(*c, "third");
}

TEST_F(SerialTransportTest, AssemblesALineThatArrivesInPieces) {
  std::thread device([fd = master()] {
    write_fd(fd, "7 ok sta");
    std::this_thread::sleep_for(20ms);
    write_fd(fd, "te=idle *");
    std::this_thread::sleep_for(20ms);
    write_fd(fd, "1234\n");
  });
  auto line = port_->read_line(2000ms);
  device.join();
  ASSERT_TRUE(line.has_value()) << line.error().message;
  EXPECT_EQ(*line, "7 ok state=idle *1234");
}

TEST_F(SerialTransportTest, SilenceIsATimeoutNeverAnEmptyLine) {
  const auto start = std::chrono::steady_clock::now();
  auto line = port_->read_line(100ms);
  const auto waited = std::chrono::steady_clock::now() - start;
  ASSERT_FALSE(line.has_value());
  EXPECT_EQ(line.error().kind, ErrorKind::timeout);
  EXPECT_NE(line.error().message.find("sent nothing within 100 ms"), std::string::npos)
      << line.error().message;
  EXPECT_GE(waited, 100ms);
}

TEST_F(SerialTransportTest, PortIsUsableAgainAfterATimeout) {
  auto first = port_->read_line(50ms);
  ASSERT_FALSE(first.has_value());
  ASSERT_EQ(first.error().kind, ErrorKind::timeout);
  // Both directions still work on the same open port.
  ASSERT_TRUE(port_->write_all("ping\n", 500ms).has_value());
  EXPECT_EQ(read_fd(master(), 5, 1000ms), "ping\n");
  ASSERT_TRUE(write_fd(master(), "pong\n"));
  auto second = port_->read_line(1000ms);
  ASSERT_TRUE(second.has_value()) << second.error().message;
  EXPECT_EQ(*second, "pong");
}

TEST_F(SerialTransportTest, PartialLineIsATimeoutThatSaysHowMuchArrived) {
  ASSERT_TRUE(write_fd(master(), "7 ok st"));
  auto line = port_->read_line(100ms);
  ASSERT_FALSE(line.has_value());
  EXPECT_EQ(line.error().kind, ErrorKind::timeout);
  EXPECT_NE(line.error().message.find("an unfinished line of 7 bytes"), std::string::npos)
      << line.error().message;
}

TEST_F(SerialTransportTest, SlowDeviceMayFinishItsLineAfterATimeout) {
  ASSERT_TRUE(write_fd(master(), "7 ok st"));
  ASSERT_FALSE(port_->read_line(50ms).has_value());
  ASSERT_TRUE(write_fd(master(), "ate=idle\n"));
  auto line = port_->read_line(1000ms);
  ASSERT_TRUE(line.has_value()) << line.error().message;
  EXPECT_EQ(*line, "7 ok state=idle");
}

TEST_F(SerialTransportTest, DiscardInputDropsBufferedAndPendingBytes) {
  ASSERT_TRUE(write_fd(master(), "half a li"));
  ASSERT_FALSE(port_->read_line(50ms).has_value());  // "half a li" now buffered
  ASSERT_TRUE(write_fd(master(), "stale reply\n"));  // still in the kernel
  std::this_thread::sleep_for(20ms);
  port_->discard_input();
  ASSERT_TRUE(write_fd(master(), "fresh reply\n"));
  auto line = port_->read_line(1000ms);
  ASSERT_TRUE(line.has_value()) << line.error().message;
  EXPECT_EQ(*line, "fresh reply");
}

TEST_F(SerialTransportTest, EndlessBytesWithoutLineEndAreGarbled) {
  const std::string noise(kMaxLineBytes + 10, 'x');
  std::thread device([fd = master(), &noise] { write_fd(fd, noise); });
  auto line = port_->read_line(2000ms);
  device.join();
  ASSERT_FALSE(line.has_value());
  EXPECT_EQ(line.error().kind, ErrorKind::garbled);
  EXPECT_NE(line.error().message.find("without a line end"), std::string::npos)
      << line.error().message;
}

TEST_F(SerialTransportTest, ClosedLineIsDisconnected) {
  pty_->close_master();
  auto line = port_->read_line(1000ms);
  ASSERT_FALSE(line.has_value());
  EXPECT_EQ(line.error().kind, ErrorKind::disconnected) << line.error().describe();
  auto sent = port_->write_all("12 status *ABCD\n", 500ms);
  ASSERT_FALSE(sent.has_value());
  EXPECT_EQ(sent.error().kind, ErrorKind::disconnected) << sent.error().describe();
}

TEST(SerialTransportOpen, DropsWhatTheDeviceSentBeforeTheHostListened) {
  auto pair = PseudoTerminal::open();
  ASSERT_TRUE(pair.has_value());
  ASSERT_TRUE(write_fd(pair->master_fd(), "left over from an earlier session\n"));
  std::this_thread::sleep_for(20ms);
  SerialSettings settings;
  settings.device = pair->slave_path();
  auto port = open_serial_transport(settings);
  ASSERT_TRUE(port.has_value()) << port.error().message;
  ASSERT_TRUE(write_fd(pair->master_fd(), "7 ok\n"));
  auto line = (*port)->read_line(1000ms);
  ASSERT_TRUE(line.has_value()) << line.error().message;
  EXPECT_EQ(*line, "7 ok");
}

TEST(SerialTransportOpen, AcceptsTheSettingsAPseudoTerminalSupports) {
  // A pseudo-terminal accepts these (see the platform notes); 7 data bits,
  // odd baud rates and 1.5 stop bits need real hardware to try.
  auto pair = PseudoTerminal::open();
  ASSERT_TRUE(pair.has_value());
  for (unsigned baud : {9600u, 115200u, 921600u}) {
    for (Parity parity : {Parity::none, Parity::even, Parity::odd}) {
      for (StopBits stop : {StopBits::one, StopBits::two}) {
        for (FlowControl flow : {FlowControl::none, FlowControl::software, FlowControl::hardware}) {
          SerialSettings s;
          s.device = pair->slave_path();
          s.baud_rate = baud;
          s.parity = parity;
          s.stop_bits = stop;
          s.flow = flow;
          auto port = open_serial_transport(s);
          EXPECT_TRUE(port.has_value()) << to_connection_string(s) << ": " << port.error().message;
        }
      }
    }
  }
}

TEST(SerialTransportOpen, RefusedSettingIsNamed) {
  auto pair = PseudoTerminal::open();
  ASSERT_TRUE(pair.has_value());
  SerialSettings s;
  s.device = pair->slave_path();
  s.baud_rate = 12345;  // no standard rate: Boost.Asio on Linux refuses it before the port does
  auto port = open_serial_transport(s);
  ASSERT_FALSE(port.has_value());
  EXPECT_EQ(port.error().kind, ErrorKind::io);
  EXPECT_NE(port.error().message.find("refused baud=12345"), std::string::npos)
      << port.error().message;
}

TEST(SerialTransportOpen, MissingPortIsNotFoundAndNamed) {
  SerialSettings s;
  s.device = "/dev/veq-no-such-port";
  auto port = open_serial_transport(s);
  ASSERT_FALSE(port.has_value());
  EXPECT_EQ(port.error().kind, ErrorKind::not_found);
  EXPECT_NE(port.error().message.find("serial:/dev/veq-no-such-port"), std::string::npos);
}

TEST(SerialTransportOpen, AFileThatIsNoTerminalIsRefused) {
  SerialSettings s;
  s.device = VEQ_SOURCE_DIR "/drivers/CMakeLists.txt";
  auto port = open_serial_transport(s);
  ASSERT_FALSE(port.has_value());
  EXPECT_EQ(port.error().kind, ErrorKind::invalid_input);
  EXPECT_NE(port.error().message.find("is not a serial port"), std::string::npos)
      << port.error().message;
}

}  // namespace
}  // namespace veq::drivers
