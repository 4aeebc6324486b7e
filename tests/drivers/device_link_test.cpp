// DeviceLink and the burette client over the in-memory transport, against a
// scripted device whose replies are written out byte for byte.
#include <gtest/gtest.h>

#include <chrono>
#include <cstdint>
#include <deque>
#include <string>

#include "drivers/burette_client.hpp"
#include "drivers/device_link.hpp"
#include "drivers/memory_transport.hpp"

namespace veq::drivers {
namespace {

/// Answers each request with the next scripted reply; "{seq}" is replaced by
/// the request's sequence number and the checksum appended.
class ScriptedDevice final : public ByteDevice {
 public:
  std::deque<std::string> replies;  // bodies without checksum, or raw bytes if raw
  std::deque<bool> raw;
  std::vector<std::string> received;

  std::string receive(std::string_view bytes) override {
    received.emplace_back(bytes);
    if (replies.empty())
      return {};
    std::string body = replies.front();
    const bool is_raw = raw.front();
    replies.pop_front();
    raw.pop_front();
    if (is_raw)
      return body;
    const auto parsed = protocol::parse(received.back().substr(0, received.back().size() - 1));
    const std::string seq = parsed ? std::to_string(parsed->sequence) : "0";
    for (auto at = body.find("{seq}"); at != std::string::npos; at = body.find("{seq}")) {
      body.replace(at, 5, seq);
    }
    char crc[8];
    std::snprintf(crc, sizeof crc, "*%04X", static_cast<unsigned>(protocol::crc16_ccitt(body)));
    return body + crc + "\n";
  }
  void script(std::string body, bool is_raw = false) {
    replies.push_back(std::move(body));
    raw.push_back(is_raw);
  }
};

struct Fixture : ::testing::Test {
  VirtualClock clock;
  ScriptedDevice device;
  MemoryTransport line{"scripted", device, clock};
  DeviceLink link{line, clock, "burette"};
};

TEST_F(Fixture, RequestBytesCarrySequenceAndChecksum) {
  device.script("{seq} ok ");
  protocol::Message m;
  m.word = "ping";
  ASSERT_TRUE(link.call(m).has_value());
  ASSERT_EQ(device.received.size(), 1u);
  // "1 ping " has CRC-16/CCITT-FALSE 0xA4BC (binascii.crc_hqx(b"1 ping ", 0xFFFF)).
  EXPECT_EQ(device.received[0], "1 ping *A4BC\n");
}

/// A complete line with a correct checksum.
std::string line_of(const std::string& body) {
  char crc[8];
  std::snprintf(crc, sizeof crc, "*%04X", static_cast<unsigned>(protocol::crc16_ccitt(body)));
  return body + crc + "\n";
}

TEST_F(Fixture, SkipsALateReplyToAnEarlierRequest) {
  // A reply to sequence 77 (left over from a timed-out request) arrives before ours.
  device.script(line_of("77 ok state=old ") + line_of("1 ok state=new "), true);
  protocol::Message m;
  m.word = "status";
  auto ok = link.call(m);
  ASSERT_TRUE(ok.has_value()) << ok.error().message;
  EXPECT_EQ(*ok->text("state"), "new");
}

TEST_F(Fixture, CorruptedReplyIsGarbledNeverAnAnswer) {
  // A valid line with one byte changed in transit.
  std::string bytes = line_of("1 ok potential_mv=-12.345 ");
  bytes[20] = '9';
  device.script(bytes, true);
  protocol::Message m;
  m.word = "read";
  auto r = link.call(m);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::garbled);
  EXPECT_NE(r.error().message.find("checksum mismatch"), std::string::npos);
}

TEST_F(Fixture, SilenceIsATimeoutAndTheClockWaitedItOut) {
  protocol::Message m;
  m.word = "status";
  const auto before = clock.now();
  auto r = link.call(m);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::timeout);
  EXPECT_NE(r.error().message.find("burette"), std::string::npos);
  EXPECT_NE(r.error().message.find("status"), std::string::npos);
  EXPECT_GE(clock.now() - before, std::chrono::milliseconds(2000));
}

TEST_F(Fixture, PartialLineIsATimeoutThatSaysSo) {
  device.script("1 ok state=id", true);
  protocol::Message m;
  m.word = "status";
  auto r = link.call(m);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::timeout);
  EXPECT_NE(r.error().message.find("unfinished line"), std::string::npos) << r.error().message;
}

TEST_F(Fixture, ErrorReplyIsDeviceRefusedWithReason) {
  device.script("{seq} error reason=over_limit message=\"too much\" ");
  BuretteClient burette(link);
  auto r = burette.start_dose(50.0, 10.0);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::device_refused);
  EXPECT_NE(r.error().message.find("over_limit"), std::string::npos);
  EXPECT_NE(r.error().message.find("too much"), std::string::npos);
}

TEST_F(Fixture, DoseRequestCarriesItsOwnTimeLimit) {
  device.script("{seq} ok ");
  BuretteClient burette(link);
  ASSERT_TRUE(burette.start_dose(0.5, 10.0).has_value());
  // 0.5 mL at 10 mL/min takes 3 s; the default margin is 5 s: limit 8000 ms.
  auto sent = protocol::parse(device.received.back().substr(0, device.received.back().size() - 1));
  ASSERT_TRUE(sent.has_value());
  EXPECT_DOUBLE_EQ(*sent->number("limit_ms"), 8000.0);
  EXPECT_DOUBLE_EQ(*sent->number("volume_ml"), 0.5);
}

TEST_F(Fixture, UnknownBuretteStateIsGarbled) {
  device.script("{seq} ok state=dancing cylinder_ml=1 delivered_ml=0 ");
  BuretteClient burette(link);
  auto s = burette.status();
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::garbled);
  EXPECT_NE(s.error().message.find("dancing"), std::string::npos);
}

TEST_F(Fixture, ClosedLineIsDisconnected) {
  line.close();
  protocol::Message m;
  m.word = "status";
  auto r = link.call(m);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::disconnected);
}

/// A run clock far ahead of the line: every reading is a second later, as a
/// 1000x demo's clock is after one millisecond of real time.
class LeapingClock final : public Clock {
 public:
  Duration now() const override { return now_ += std::chrono::seconds(1); }
  void sleep_for(Duration d) override { now_ += d; }

 private:
  mutable Duration now_{0};
};

/// A line in real time (like a serial port) whose device has already sent
/// the scripted lines: each read takes the next at once.
class AnsweredRealLine final : public Transport {
 public:
  std::deque<std::string> lines;
  std::string describe() const override { return "test:answered"; }
  Result<void> write_all(std::string_view, std::chrono::milliseconds) override { return {}; }
  Result<std::string> read_line(std::chrono::milliseconds timeout) override {
    if (lines.empty())
      return make_error(ErrorKind::timeout, "nothing within " + std::to_string(timeout.count()));
    std::string line = lines.front();
    lines.pop_front();
    return line;
  }
  void discard_input() override { lines.clear(); }
  std::chrono::nanoseconds deadline_now() const override { return real_time_now(); }
};

TEST(DeviceLinkDeadline, CountsTheReplyTimeoutOnTheLineNotOnAScaledRunClock) {
  // The reply is there at once, behind a late answer to an earlier request;
  // the run's clock meanwhile leaps seconds ahead. The 300 ms deadline is
  // real time on a real line, so neither the leaps nor the stale line may
  // end the exchange (counted on the run's clock, it timed out at once).
  LeapingClock clock;
  AnsweredRealLine line;
  for (const std::uint32_t sequence : {7u, 1u}) {
    std::string bytes = protocol::encode(protocol::ok_reply(sequence));
    bytes.pop_back();  // read_line() hands a line over without its end
    line.lines.push_back(bytes);
  }
  LinkOptions options;
  options.reply_timeout = std::chrono::milliseconds(300);
  DeviceLink link(line, clock, "burette", options);
  protocol::Message request;
  request.word = "ping";
  auto reply = link.call(request);
  ASSERT_TRUE(reply.has_value()) << reply.error().describe();
  EXPECT_EQ(reply->sequence, 1u);
  EXPECT_TRUE(line.lines.empty());
}

}  // namespace
}  // namespace veq::drivers
