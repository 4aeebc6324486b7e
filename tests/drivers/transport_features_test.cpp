// Line ends, the raw-traffic log, reopening a line and the links' reconnect
// policy (stop first if a dose may be in flight), and streamed messages kept
// beside replies. TCP runs against a listener on 127.0.0.1 only.
#include <gtest/gtest.h>

#include <algorithm>
#include <boost/asio/ip/tcp.hpp>
#include <boost/asio/read_until.hpp>
#include <boost/asio/streambuf.hpp>
#include <boost/asio/write.hpp>
#include <chrono>
#include <cstdio>
#include <deque>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <thread>

#include "drivers/burette_client.hpp"
#include "drivers/connection.hpp"
#include "drivers/device_link.hpp"
#include "drivers/line_framing.hpp"
#include "drivers/memory_transport.hpp"
#include "drivers/reopening_transport.hpp"
#include "drivers/traffic_log.hpp"

namespace veq::drivers {
namespace {

using namespace std::chrono_literals;

// ---- line ends ----

TEST(LineEnd, NamesAndEscapes) {
  EXPECT_EQ(*parse_line_end("lf"), "\n");
  EXPECT_EQ(*parse_line_end("cr"), "\r");
  EXPECT_EQ(*parse_line_end("crlf"), "\r\n");
  EXPECT_EQ(*parse_line_end("etx"), "\x03");
  EXPECT_EQ(*parse_line_end("\\x03\\r"), "\x03\r");
  EXPECT_EQ(line_end_name("\r\n"), "crlf");
  EXPECT_EQ(line_end_name("\x02\x03"), "\\x02\\x03");
  for (const char* bad : {"", "tab", "\\q", "\\x0", "\\r\\n\\r\\n\\r"}) {
    auto r = parse_line_end(bad);
    EXPECT_FALSE(r.has_value()) << bad;
    if (!r) {
      EXPECT_NE(r.error().message.find(std::string("'") + bad + "'"), std::string::npos);
    }
  }
}

TEST(LineEnd, TakeLineSplitsOnTheTerminatorOnly) {
  std::string buffer = "A 1\r\nB 2\r\nC";
  EXPECT_EQ(*take_line(buffer, "\n"), "A 1");  // native: the \r before \n is dropped
  EXPECT_EQ(*take_line(buffer, "\r\n"), "B 2");
  EXPECT_FALSE(take_line(buffer, "\r\n").has_value());
  EXPECT_EQ(buffer, "C");
  std::string cr = "X\nY\rZ";
  EXPECT_EQ(*take_line(cr, "\r"), "X\nY");  // with CR ends, LF is an ordinary byte
  EXPECT_EQ(cr, "Z");
}

/// Answers each line it receives with scripted bytes, and records what came.
class EchoDevice final : public ByteDevice {
 public:
  std::deque<std::string> answers;
  std::string received;
  std::string receive(std::string_view bytes) override {
    received.append(bytes);
    if (answers.empty())
      return {};
    std::string a = answers.front();
    answers.pop_front();
    return a;
  }
};

TEST(LineEnd, MemoryTransportFramesOnItsLineEnd) {
  VirtualClock clock;
  EchoDevice device;
  MemoryTransport line("echo", device, clock);
  ASSERT_TRUE(line.set_line_end("\r").has_value());
  EXPECT_EQ(line.line_end(), "\r");
  device.answers.push_back("OK 1\rOK 2\r");
  ASSERT_TRUE(line.write_all("Q\r", 100ms).has_value());
  EXPECT_EQ(*line.read_line(100ms), "OK 1");
  EXPECT_EQ(*line.read_line(100ms), "OK 2");
  EXPECT_FALSE(line.set_line_end("").has_value());
  EXPECT_FALSE(line.set_line_end("12345").has_value());
}

TEST(LineEnd, TcpTransportFramesOnCarriageReturns) {
  namespace asio = boost::asio;
  using asio::ip::tcp;
  asio::io_context io;
  tcp::acceptor acceptor(io, tcp::endpoint(asio::ip::address_v4::loopback(), 0));
  const auto port = acceptor.local_endpoint().port();
  std::thread device([&] {
    tcp::socket s = acceptor.accept();
    asio::streambuf request;
    asio::read_until(s, request, '\r');
    // Two replies in one packet and a third split across two.
    asio::write(s, asio::buffer(std::string("ACK\rST I C 5\rPAR")));
    std::this_thread::sleep_for(20ms);
    asio::write(s, asio::buffer(std::string("TIAL\r")));
    std::this_thread::sleep_for(100ms);
  });
  auto t = open_transport("tcp:127.0.0.1:" + std::to_string(port));
  ASSERT_TRUE(t.has_value()) << t.error().message;
  ASSERT_TRUE((*t)->set_line_end("\r").has_value());
  ASSERT_TRUE((*t)->write_all("ST\r", 500ms).has_value());
  EXPECT_EQ(*(*t)->read_line(1000ms), "ACK");
  EXPECT_EQ(*(*t)->read_line(1000ms), "ST I C 5");
  EXPECT_EQ(*(*t)->read_line(1000ms), "PARTIAL");
  device.join();
}

TEST(LineEnd, ATransportThatCannotChangeItSaysSo) {
  struct Fixed final : Transport {
    std::string describe() const override { return "fixed"; }
    Result<void> write_all(std::string_view, std::chrono::milliseconds) override { return {}; }
    Result<std::string> read_line(std::chrono::milliseconds) override { return std::string(); }
    void discard_input() override {}
    std::chrono::nanoseconds deadline_now() const override { return {}; }
  } fixed;
  EXPECT_TRUE(fixed.set_line_end("\n").has_value());
  auto r = fixed.set_line_end("\r");
  ASSERT_FALSE(r.has_value());
  EXPECT_NE(r.error().message.find("cannot end lines with 'cr'"), std::string::npos);
  auto reopened = fixed.reopen();
  ASSERT_FALSE(reopened.has_value());
  EXPECT_EQ(reopened.error().kind, ErrorKind::disconnected);
}

// ---- traffic log ----

/// Whether an entry begins "YYYY-MM-DDTHH:MM:SS.ffffffZ +S.ffffff <line> ".
/// (A hand check: std::regex trips GCC 12's uninitialised-use warning under
/// the sanitizers.)
bool stamped(const std::string& entry, const std::string& line) {
  const std::string shape = "dddd-dd-ddTdd:dd:dd.ddddddZ +";
  if (entry.size() < shape.size())
    return false;
  for (std::size_t i = 0; i < shape.size(); ++i) {
    const bool digit = entry[i] >= '0' && entry[i] <= '9';
    if (shape[i] == 'd' ? !digit : entry[i] != shape[i])
      return false;
  }
  std::size_t i = shape.size();
  const std::size_t whole = i;
  while (i < entry.size() && entry[i] >= '0' && entry[i] <= '9')
    ++i;
  if (i == whole || i >= entry.size() || entry[i] != '.')
    return false;
  const std::size_t fraction = ++i;
  while (i < entry.size() && entry[i] >= '0' && entry[i] <= '9')
    ++i;
  return i - fraction == 6 && entry.compare(i, line.size() + 2, " " + line + " ") == 0;
}

TEST(TrafficLog, EveryByteBothWaysWithTimestamps) {
  VirtualClock clock;
  EchoDevice device;
  MemoryTransport line("burette", device, clock);
  std::ostringstream out;
  auto log = std::make_shared<TrafficLog>(out);
  LoggingTransport logged(line, log);
  device.answers.push_back("1 ok\r\n");
  ASSERT_TRUE(logged.write_all("1 status *A3D7\n", 100ms).has_value());
  ASSERT_TRUE(logged.read_line(100ms).has_value());
  auto silent = logged.read_line(50ms);
  ASSERT_FALSE(silent.has_value());
  EXPECT_EQ(log->entries(), 3u);

  std::istringstream in(out.str());
  std::string sent, received, event;
  std::getline(in, sent);
  std::getline(in, received);
  std::getline(in, event);
  // 2026-03-04T10:15:30.123456Z +0.000012 memory:burette > ...
  EXPECT_TRUE(stamped(sent, "memory:burette")) << sent;
  EXPECT_NE(sent.find(" > 1 status *A3D7\\n"), std::string::npos) << sent;
  // The received line is shown with the line end the transport frames on.
  EXPECT_NE(received.find(" < 1 ok\\n"), std::string::npos) << received;
  EXPECT_NE(event.find(" ! timeout: memory:burette sent nothing within 50 ms"), std::string::npos)
      << event;
}

TEST(TrafficLog, ControlBytesAreEscaped) {
  EXPECT_EQ(escape_bytes(std::string("A\x01\xff\r\n\\", 6)), "A\\x01\\xFF\\r\\n\\\\");
}

TEST(TrafficLog, AConnectionStringOpensOneSharedFile) {
  namespace asio = boost::asio;
  using asio::ip::tcp;
  const auto path = std::filesystem::temp_directory_path() /
                    ("veq-traffic-" + std::to_string(::getpid()) + ".log");
  std::filesystem::remove(path);
  auto a = TrafficLog::open_file(path.string());
  auto b = TrafficLog::open_file(path.string());
  ASSERT_TRUE(a && b);
  EXPECT_EQ(a->get(), b->get());  // one writer per file

  asio::io_context io;
  tcp::acceptor acceptor(io, tcp::endpoint(asio::ip::address_v4::loopback(), 0));
  const auto port = acceptor.local_endpoint().port();
  std::thread device([&] {
    tcp::socket s = acceptor.accept();
    asio::streambuf request;
    asio::read_until(s, request, '\n');
    asio::write(s, asio::buffer(std::string("1 ok *0000\n")));
    std::this_thread::sleep_for(50ms);
  });
  const std::string where = "tcp:127.0.0.1:" + std::to_string(port);
  {
    auto t = open_transport(where + "?traffic_log=" + path.string());
    ASSERT_TRUE(t.has_value()) << t.error().message;
    ASSERT_TRUE((*t)->write_all("1 ping *A4BC\n", 500ms).has_value());
    ASSERT_TRUE((*t)->read_line(1000ms).has_value());
  }
  device.join();
  std::ifstream in(path);
  std::stringstream text;
  text << in.rdbuf();
  EXPECT_NE(text.str().find(where + " ! line opened"), std::string::npos) << text.str();
  EXPECT_NE(text.str().find(where + " > 1 ping *A4BC\\n"), std::string::npos) << text.str();
  EXPECT_NE(text.str().find(where + " < 1 ok *0000\\n"), std::string::npos) << text.str();
  std::filesystem::remove(path);
}

TEST(TrafficLog, AnUnwritableFileIsRefusedWithItsPath) {
  auto log = TrafficLog::open_file("/nonexistent-folder-for-veq/traffic.log");
  ASSERT_FALSE(log.has_value());
  EXPECT_EQ(log.error().kind, ErrorKind::io);
  EXPECT_NE(log.error().message.find("/nonexistent-folder-for-veq/traffic.log"), std::string::npos);
}

// ---- reopening ----

TEST(Reopening, ATcpLineComesBackAfterTheConverterDroppedIt) {
  namespace asio = boost::asio;
  using asio::ip::tcp;
  asio::io_context io;
  tcp::acceptor acceptor(io, tcp::endpoint(asio::ip::address_v4::loopback(), 0));
  const auto port = acceptor.local_endpoint().port();
  std::thread device([&] {
    for (int session = 0; session < 2; ++session) {
      tcp::socket s = acceptor.accept();
      asio::streambuf request;
      asio::read_until(s, request, '\n');
      asio::write(s, asio::buffer("session " + std::to_string(session) + "\n"));
      // The first session ends at once: a converter dropping the connection.
      if (session == 1)
        std::this_thread::sleep_for(50ms);
    }
  });
  auto t = open_transport("tcp:127.0.0.1:" + std::to_string(port));
  ASSERT_TRUE(t.has_value()) << t.error().message;
  ASSERT_TRUE((*t)->set_line_end("\n").has_value());
  ASSERT_TRUE((*t)->write_all("hello\n", 500ms).has_value());
  EXPECT_EQ(*(*t)->read_line(1000ms), "session 0");
  auto lost = (*t)->read_line(1000ms);
  ASSERT_FALSE(lost.has_value());
  EXPECT_EQ(lost.error().kind, ErrorKind::disconnected) << lost.error().describe();
  ASSERT_TRUE((*t)->reopen().has_value());
  ASSERT_TRUE((*t)->write_all("hello again\n", 500ms).has_value());
  EXPECT_EQ(*(*t)->read_line(1000ms), "session 1");
  device.join();
}

TEST(Reopening, AFailedReopenLeavesTheLineClosedAndSaysWhy) {
  int opened = 0;
  VirtualClock clock;
  EchoDevice device;
  auto first = std::make_unique<MemoryTransport>("burette", device, clock);
  ReopeningTransport line(std::move(first), [&]() -> Result<std::unique_ptr<Transport>> {
    ++opened;
    return make_error(ErrorKind::not_found, "serial:/dev/ttyUSB9: no such port");
  });
  ASSERT_TRUE(line.set_line_end("\r").has_value());
  auto r = line.reopen();
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(opened, 1);
  EXPECT_NE(r.error().message.find("no such port"), std::string::npos);
  auto write = line.write_all("X\r", 10ms);
  ASSERT_FALSE(write.has_value());
  EXPECT_EQ(write.error().kind, ErrorKind::disconnected);
  EXPECT_EQ(line.describe(), "memory:burette");
  EXPECT_EQ(line.line_end(), "\r");
}

// ---- reconnect policy and streamed messages on a native link ----

/// A native device scripted per command word; replies carry the request's
/// sequence and a computed checksum.
class NativeDevice final : public ByteDevice {
 public:
  std::vector<std::string> words;  ///< command words received, in order
  std::string state = "idle";
  std::string before_reply;  ///< bytes sent ahead of the next reply (a streamed reading)

  std::string receive(std::string_view bytes) override {
    auto m = protocol::parse(bytes.substr(0, bytes.size() - 1));
    if (!m)
      return {};
    words.push_back(m->word);
    protocol::Message r = protocol::ok_reply(m->sequence);
    if (m->word == "dose")
      state = "dosing";
    if (m->word == "stop")
      state = "idle";
    if (m->word == "status" || m->word == "stop") {
      r.add("state", state).add("cylinder_ml", "10").add("delivered_ml", "0.5");
    }
    std::string out = before_reply + protocol::encode(r);
    before_reply.clear();
    return out;
  }
};

struct Reconnect : ::testing::Test {
  VirtualClock clock;
  NativeDevice device;
  MemoryTransport line{"burette", device, clock};
  LinkOptions options() {
    LinkOptions o;
    o.reconnect.max_attempts = 3;
    return o;
  }
};

TEST_F(Reconnect, StopGoesFirstWhenADoseMayBeInFlight) {
  DeviceLink link(line, clock, "burette", options());
  BuretteClient burette(link);
  ASSERT_TRUE(burette.start_dose(0.5, 10.0).has_value());
  EXPECT_TRUE(link.dose_may_be_in_flight());
  line.close();           // the cable is pulled while the piston moves
  line.refuse_reopen(2);  // and plugged back in on the third attempt
  const auto before = clock.now();
  auto s = burette.status();
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::disconnected);
  EXPECT_NE(s.error().message.find("reopened (attempt 3)"), std::string::npos) << s.error().message;
  EXPECT_NE(s.error().message.find("'stop' was sent first"), std::string::npos);
  EXPECT_NE(s.error().message.find("stop confirmed"), std::string::npos);
  EXPECT_NE(s.error().message.find("'status' was not repeated"), std::string::npos);
  // The first words on the new line: stop, and nothing else.
  ASSERT_EQ(device.words.size(), 2u);
  EXPECT_EQ(device.words[0], "dose");
  EXPECT_EQ(device.words[1], "stop");
  EXPECT_FALSE(link.dose_may_be_in_flight());
  EXPECT_EQ(link.reconnections(), 1);
  // Back-off: 250 + 500 + 1000 ms of waiting before the third attempt.
  EXPECT_EQ(clock.now() - before, std::chrono::milliseconds(1750));
}

TEST_F(Reconnect, WithNothingMovingTheRequestIsSentAgain) {
  DeviceLink link(line, clock, "burette", options());
  BuretteClient burette(link);
  line.close();
  auto s = burette.status();
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_EQ(s->state, BuretteState::idle);
  ASSERT_EQ(device.words.size(), 1u);
  EXPECT_EQ(device.words[0], "status");
  EXPECT_EQ(line.reopen_count(), 1);
}

TEST_F(Reconnect, BoundedAttemptsThenTheLineIsReportedClosed) {
  DeviceLink link(line, clock, "burette", options());
  BuretteClient burette(link);
  line.close();
  line.refuse_reopen(-1);
  auto s = burette.status();
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::disconnected);
  EXPECT_NE(s.error().message.find("3 attempts to reopen the line failed"), std::string::npos)
      << s.error().message;
  EXPECT_TRUE(device.words.empty());
}

TEST_F(Reconnect, OffByDefault) {
  DeviceLink link(line, clock, "burette");
  BuretteClient burette(link);
  line.close();
  const auto before = clock.now();
  auto s = burette.status();
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::disconnected);
  EXPECT_EQ(clock.now(), before);
  EXPECT_EQ(line.reopen_count(), 0);
}

TEST_F(Reconnect, AFailedDoseHaltsFurtherDoses) {
  DeviceLink link(line, clock, "burette");
  BuretteClient burette(link);
  ASSERT_TRUE(burette.start_dose(0.5, 10.0).has_value());
  line.close();
  auto s = burette.wait_until_idle(3.0);
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::disconnected);
  EXPECT_NE(s.error().message.find("stop not confirmed"), std::string::npos) << s.error().message;
  EXPECT_TRUE(burette.halted());
  ASSERT_TRUE(line.reopen().has_value());
  auto again = burette.start_dose(0.1, 10.0);
  ASSERT_FALSE(again.has_value());
  EXPECT_NE(again.error().message.find("dosing is halted"), std::string::npos);
  EXPECT_EQ(device.words.back(), "dose");  // the refused dose never went out
  EXPECT_EQ(std::count(device.words.begin(), device.words.end(), "dose"), 1);
  // Stop is always allowed; after the operator's check dosing resumes.
  ASSERT_TRUE(burette.stop().has_value());
  burette.resume_dosing();
  ASSERT_TRUE(burette.start_dose(0.1, 10.0).has_value());
}

TEST_F(Reconnect, AStreamedMessageBeforeAReplyIsKept) {
  DeviceLink link(line, clock, "meter");
  protocol::Message reading;
  reading.word = "reading";
  reading.add("potential_mv", "101.250").add("temperature_c", "24.90");
  device.before_reply = protocol::encode(reading);
  protocol::Message ping;
  ping.word = "ping";
  ASSERT_TRUE(link.call(ping).has_value());
  auto kept = link.next_unsolicited(10ms);
  ASSERT_TRUE(kept.has_value()) << kept.error().message;
  EXPECT_EQ(kept->word, "reading");
  EXPECT_EQ(*kept->text("potential_mv"), "101.250");
  auto none = link.next_unsolicited(10ms);
  ASSERT_FALSE(none.has_value());
  EXPECT_EQ(none.error().kind, ErrorKind::timeout);
  EXPECT_NE(none.error().message.find("(streamed reading)"), std::string::npos);
}

}  // namespace
}  // namespace veq::drivers
