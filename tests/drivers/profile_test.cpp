// Device profiles: the two shipped profiles (drivers/profiles/) read, every
// operation's bytes on both sides of the line written out by hand, scaling
// and word maps both ways, and bad profiles refused with the line and the
// reason.
#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "drivers/profile.hpp"

namespace veq::drivers::profile {
namespace {

const std::string kProfiles = std::string(VEQ_SOURCE_DIR) + "/drivers/profiles/";

Profile load(const std::string& name) {
  auto p = load_profile(kProfiles + name);
  EXPECT_TRUE(p.has_value()) << (p ? "" : p.error().message);
  return p ? *p : Profile{};
}

protocol::Message request(std::string word) {
  protocol::Message m;
  m.word = std::move(word);
  return m;
}

/// The host's bytes for a request.
std::string command(const Profile& p, const protocol::Message& m) {
  auto bytes = encode_command(p, m);
  EXPECT_TRUE(bytes.has_value()) << (bytes ? "" : bytes.error().message);
  return bytes ? *bytes : std::string();
}

/// The native reply the host reads from a line.
protocol::Message reply(const Profile& p, const std::string& word, const std::string& line) {
  const Operation* op = p.find(word);
  EXPECT_NE(op, nullptr) << word;
  if (!op)
    return {};
  auto m = read_reply(p, *op, line);
  EXPECT_TRUE(m.has_value()) << (m ? "" : m.error().message);
  return m ? *m : protocol::Message{};
}

std::string field(const protocol::Message& m, std::string_view name) {
  auto v = m.find(name);
  return v ? std::string(*v) : "<missing>";
}

// ---- the Stonebridge PB-25 burette ----

TEST(StonebridgeProfile, ReadsAndStatesWhatItMaps) {
  const Profile p = load("stonebridge_burette.profile");
  EXPECT_EQ(p.role, Role::burette);
  EXPECT_EQ(p.model, "Stonebridge PB-25 piston burette");
  EXPECT_EQ(p.command_end, "\r");
  EXPECT_EQ(p.reply_end, "\r\n");
  ASSERT_TRUE(p.reply_timeout.has_value());
  EXPECT_EQ(p.reply_timeout->count(), 1000);
  const std::vector<std::string> features = {"fill", "valve", "reset_counter", "host_silence_limit",
                                             "ping"};
  EXPECT_EQ(p.features(), features);
}

TEST(StonebridgeProfile, CommandBytesWithScaling) {
  const Profile p = load("stonebridge_burette.profile");
  EXPECT_EQ(command(p, request("identify")), "WHO\r");
  // 0.05 mL x 2000 steps/mL = 100 steps; 10 mL/min x 100 = 1000.
  auto dose = request("dose");
  dose.add("volume_ml", "0.05000").add("rate_ml_per_min", "10.0000").add("limit_ms", "8000");
  EXPECT_EQ(command(p, dose), "DV 100 R 1000 T 8000\r");
  auto fill = request("fill");
  fill.add("rate_ml_per_min", "40.0000");
  EXPECT_EQ(command(p, fill), "FL R 4000\r");
  EXPECT_EQ(command(p, request("status")), "ST\r");
  EXPECT_EQ(command(p, request("stop")), "HALT\r");
  auto valve = request("valve");
  valve.add("port", "2");
  EXPECT_EQ(command(p, valve), "PORT 2\r");
  EXPECT_EQ(command(p, request("reset_counter")), "ZERO\r");
  auto silence = request("host_silence_limit");
  silence.add("ms", "3000");
  EXPECT_EQ(command(p, silence), "WD 3000\r");
  EXPECT_EQ(command(p, request("ping")), "NOP\r");
}

TEST(StonebridgeProfile, RepliesInVeqUnitsAndWords) {
  const Profile p = load("stonebridge_burette.profile");
  EXPECT_EQ(field(reply(p, "identify", "STONEBRIDGE PB-25 SN SB-77"), "serial_number"), "SB-77");
  EXPECT_EQ(reply(p, "dose", "ACK").word, "ok");
  // 39900 steps / 2000 = 19.95 mL; 100 steps = 0.05 mL; 9800 tenths = 980 mL.
  const auto s = reply(p, "status", "ST D C 39900 D 100 B 9800 P 2 L C E 0");
  EXPECT_EQ(s.word, "ok");
  EXPECT_EQ(field(s, "state"), "dosing");
  EXPECT_EQ(field(s, "cylinder_ml"), "19.95");
  EXPECT_EQ(field(s, "delivered_ml"), "0.05");
  EXPECT_EQ(field(s, "reservoir_ml"), "980");
  EXPECT_EQ(field(s, "port"), "2");
  EXPECT_EQ(field(s, "last_stop"), "completed");
  EXPECT_EQ(field(s, "fault"), "none");
  const auto stalled = reply(p, "status", "ST X C 25000 D 15000 B 9000 P 1 L X E 2");
  EXPECT_EQ(field(stalled, "state"), "fault");
  EXPECT_EQ(field(stalled, "fault"), "stalled");
  // Padding after a reply is allowed.
  EXPECT_EQ(reply(p, "ping", "ACK  ").word, "ok");
}

TEST(StonebridgeProfile, RefusalsCarryTheMappedReason) {
  const Profile p = load("stonebridge_burette.profile");
  const auto r = reply(p, "dose", "NAK 15 the cylinder holds only 0.0200 mL; fill first");
  EXPECT_EQ(r.word, "error");
  EXPECT_EQ(field(r, "reason"), "empty");
  EXPECT_EQ(field(r, "message"), "the cylinder holds only 0.0200 mL; fill first");
}

TEST(StonebridgeProfile, UnknownWordsAndStrangeLinesAreGarbled) {
  const Profile p = load("stonebridge_burette.profile");
  auto unknown = read_reply(p, *p.find("status"), "ST Q C 1 D 1 B 1 P 1 L C E 0");
  ASSERT_FALSE(unknown.has_value());
  EXPECT_EQ(unknown.error().kind, ErrorKind::garbled);
  EXPECT_NE(unknown.error().message.find("'Q' is not a known value of state"), std::string::npos)
      << unknown.error().message;
  auto noise = read_reply(p, *p.find("status"), "\x01\xffST ??");
  ASSERT_FALSE(noise.has_value());
  EXPECT_EQ(noise.error().kind, ErrorKind::garbled);
  EXPECT_NE(noise.error().message.find("\\x01\\xFFST ??"), std::string::npos)
      << noise.error().message;
  auto letters = read_reply(p, *p.find("status"), "ST D C many D 100 B 9800 P 2 L C E 0");
  EXPECT_FALSE(letters.has_value());
}

TEST(StonebridgeProfile, DeviceSideReadsCommandsAndWritesReplies) {
  const Profile p = load("stonebridge_burette.profile");
  auto dose = parse_command(p, "DV 100 R 1000 T 8000");
  ASSERT_TRUE(dose.has_value()) << dose.error().message;
  EXPECT_EQ(dose->word, "dose");
  EXPECT_EQ(field(*dose, "volume_ml"), "0.05");
  EXPECT_EQ(field(*dose, "rate_ml_per_min"), "10");
  EXPECT_EQ(field(*dose, "limit_ms"), "8000");
  protocol::Message status = protocol::ok_reply(0);
  status.add("state", "dosing").add("cylinder_ml", 19.95, 5).add("delivered_ml", 0.05, 5);
  status.add("reservoir_ml", 980.0, 2).add("last_stop", "completed").add("fault", "none");
  status.add("port", "2");
  auto bytes = encode_reply(p, "status", status);
  ASSERT_TRUE(bytes.has_value()) << bytes.error().message;
  EXPECT_EQ(*bytes, "ST D C 39900 D 100 B 9800 P 2 L C E 0\r\n");
  auto refusal = encode_reply(p, "dose", protocol::error_reply(0, "busy", "still moving"));
  ASSERT_TRUE(refusal.has_value());
  EXPECT_EQ(*refusal, "NAK 13 still moving\r\n");
  EXPECT_FALSE(parse_command(p, "DANCE").has_value());
}

// ---- the Lantern LM-2 meter ----

TEST(LanternProfile, CommandBytes) {
  const Profile p = load("lantern_meter.profile");
  EXPECT_EQ(p.role, Role::potential_sensor);
  EXPECT_TRUE(p.echo);
  EXPECT_EQ(command(p, request("identify")), "MODEL?\r\n");
  EXPECT_EQ(command(p, request("read")), "MEAS?\r\n");
  auto stream = request("stream");
  stream.add("interval_ms", "100");
  EXPECT_EQ(command(p, stream), "EVERY 100\r\n");
  EXPECT_EQ(command(p, request("ping")), "HELLO?\r\n");
  const std::vector<std::string> features = {"stream", "ping"};
  EXPECT_EQ(p.features(), features);
}

TEST(LanternProfile, RepliesReadingsAndRefusals) {
  const Profile p = load("lantern_meter.profile");
  const auto id =
      reply(p, "identify", "LANTERN LM-2 LM2-0815 ELECTRODE calcium ion-selective, A12");
  EXPECT_EQ(field(id, "serial_number"), "LM2-0815");
  EXPECT_EQ(field(id, "electrode"), "calcium ion-selective, A12");
  const auto r = reply(p, "read", "MV -12.3 TEMP 25.0");
  EXPECT_EQ(field(r, "potential_mv"), "-12.3");
  EXPECT_EQ(field(r, "temperature_c"), "25");
  // A streamed reading arriving while a reply is awaited is recognised as one.
  const auto streamed = reply(p, "read", "AUTO MV 101.2 TEMP 24.9");
  EXPECT_EQ(streamed.word, "reading");
  EXPECT_EQ(field(streamed, "potential_mv"), "101.2");
  auto alone = read_unsolicited(p, "AUTO MV 101.2 TEMP 24.9");
  ASSERT_TRUE(alone.has_value());
  EXPECT_EQ(field(*alone, "temperature_c"), "24.9");
  const auto refused = reply(p, "read", "ERROR no such command");
  EXPECT_EQ(refused.word, "error");
  EXPECT_EQ(field(refused, "reason"), "refused");
  EXPECT_EQ(field(refused, "message"), "no such command");
}

TEST(LanternProfile, DeviceSideRoundsToTheMetersResolution) {
  const Profile p = load("lantern_meter.profile");
  protocol::Message reading = protocol::ok_reply(0);
  reading.add("potential_mv", "-12.345").add("temperature_c", "25.00");
  auto bytes = encode_reply(p, "read", reading);
  ASSERT_TRUE(bytes.has_value());
  EXPECT_EQ(*bytes, "MV -12.3 TEMP 25.0\r\n");
  reading.word = "reading";
  auto streamed = encode_unsolicited(p, reading);
  ASSERT_TRUE(streamed.has_value());
  EXPECT_EQ(*streamed, "AUTO MV -12.3 TEMP 25.0\r\n");
}

TEST(Template, NumbersPadSignsAndOffsets) {
  auto p = parse_profile(
      "veq_profile 1\nrole stirrer\nmodel x\ncommand_end lf\nreply_end \"\\x03\"\n"
      "scale rpm 1 offset -100\nscale speed_rpm 1/10\n"
      "op identify\nsend \"I\"\nreply \"I {max_speed_rpm:int}\"\n"
      "op speed\nsend \"S{rpm:int5}\"\nreply \"K\"\n"
      "op status\nsend \"Q\"\nreply \"V{speed_rpm:fix1}\"\n",
      "inline");
  ASSERT_TRUE(p.has_value()) << p.error().message;
  EXPECT_EQ(p->reply_end, "\x03");
  auto speed = request("speed");
  speed.add("rpm", "50");
  // 50 - 100 = -50, zero-padded to 5 digits after the sign.
  EXPECT_EQ(command(*p, speed), "S-00050\n");
  // Right-aligned numbers: leading spaces belong to the number.
  EXPECT_EQ(field(reply(*p, "status", "V   61.5"), "speed_rpm"), "615");
  EXPECT_EQ(field(reply(*p, "status", "V+61.5"), "speed_rpm"), "615");
}

// ---- bad profiles ----

/// A valid small burette profile, line by line, to spoil one line at a time.
std::vector<std::string> good_lines() {
  return {"veq_profile 1",                                                  // 1
          "role burette",                                                   // 2
          "model \"test burette\"",                                         // 3
          "command_end cr",                                                 // 4
          "reply_end crlf",                                                 // 5
          "fact cylinder_ml 10",                                            // 6
          "fact steps_per_cylinder 1000",                                   // 7
          "fact max_rate_ml_per_min 10",                                    // 8
          "fact max_dose_ml 2",                                             // 9
          "scale volume_ml 100",                                            // 10
          "map state I idle",                                               // 11
          "map state D dosing",                                             // 12
          "error \"NO {reason:word}\"",                                     // 13
          "op identify",                                                    // 14
          "send \"ID\"",                                                    // 15
          "reply \"TEST {serial_number:word}\"",                            // 16
          "op dose",                                                        // 17
          "send \"D{volume_ml:int},{rate_ml_per_min:int}\"",                // 18
          "reply \"OK\"",                                                   // 19
          "op status",                                                      // 20
          "send \"S\"",                                                     // 21
          "reply \"{state:word} {cylinder_ml:fix3} {delivered_ml:fix3}\"",  // 22
          "op stop",                                                        // 23
          "send \"X\"",                                                     // 24
          "reply \"OK\"",                                                   // 25
          "then status"};                                                   // 26
}

std::string join(const std::vector<std::string>& lines) {
  std::string out;
  for (const auto& l : lines)
    out += l + "\n";
  return out;
}

TEST(BadProfile, TheGoodOneIsGood) {
  auto p = parse_profile(join(good_lines()), "test.profile");
  ASSERT_TRUE(p.has_value()) << p.error().message;
}

TEST(BadProfile, EveryFaultIsNamedWithItsLine) {
  struct Case {
    int line;            // 1-based line to replace (0: append, -1: remove)
    std::string text;    // the new line
    std::string at;      // "line N"
    std::string reason;  // part of the reason
  };
  const Case cases[] = {
      {1, "role burette", "line 1", "begins with 'veq_profile 1'"},
      {1, "veq_profile 2", "line 1", "format revision '2'"},
      {2, "role pipette", "line 2", "unknown role 'pipette'"},
      {3, "colour blue", "line 3", "unknown directive 'colour'"},
      {4, "command_end tab", "line 4", "line end 'tab'"},
      {6, "fact potential_mv 3", "line 6", "'potential_mv' is not an identify field"},
      {10, "scale volume_ml 0", "line 10", "not a number other than 0"},
      {12, "map state I dosing", "line 12", "'I' of state is mapped twice"},
      {13, "error \"NO {reason:word} {volume_ml:int}\"", "line 13", "captures only 'reason'"},
      {14, "op read", "line 14", "has no operation 'read'"},
      {18, "send \"D{volume_ml:float}\"", "line 18", "unknown type 'float'"},
      {18, "send \"D{volume_ml:int}{rate_ml_per_min:int}\"", "line 18", "touch"},
      {18, "send \"D{volume_ml:int\"", "line 18", "not closed"},
      {18, "send \"D{volume:int},{rate_ml_per_min:int}\"", "line 18", "sends no field 'volume'"},
      {18, "send \"D{volume_ml:int}\"", "line 18", "must send field 'rate_ml_per_min'"},
      {18, "send \"D\\q\"", "line 18", "unknown escape"},
      {18, "send \"D", "line 18", "quote is not closed"},
      {19, "reply \"{message:text} OK\"", "line 19", "put it last"},
      {22, "reply \"{state:word} {cylinder_ml:fix3}\"", "line 22",
       "must give field 'delivered_ml'"},
      {22, "reply \"{state:word} {cylinder_ml:fix3} {delivered_ml:fix3} {colour:word}\"", "line 22",
       "has no field 'colour'"},
      {23, "op dose", "line 23", "op 'dose' given twice (first on line 17)"},
      {26, "then calibrate", "line 26", "'calibrate' named by 'then' is not in the profile"},
      {0, "unsolicited \"R {potential_mv:fix1}\"", "line 27", "sends no readings on its own"},
      {0, "send \"X\"", "line 27", "'send' given twice"},
  };
  for (const auto& c : cases) {
    auto lines = good_lines();
    if (c.line == 0)
      lines.push_back(c.text);
    else
      lines[static_cast<std::size_t>(c.line - 1)] = c.text;
    auto p = parse_profile(join(lines), "test.profile");
    ASSERT_FALSE(p.has_value()) << "accepted: " << c.text;
    EXPECT_EQ(p.error().kind, ErrorKind::invalid_input);
    EXPECT_NE(p.error().message.find("test.profile: " + c.at + ":"), std::string::npos)
        << c.text << " -> " << p.error().message;
    EXPECT_NE(p.error().message.find(c.reason), std::string::npos)
        << c.text << " -> " << p.error().message;
  }
}

TEST(BadProfile, MissingPartsAreNamed) {
  auto no_stop = good_lines();
  no_stop.resize(22);  // ops identify, dose, status only
  auto p = parse_profile(join(no_stop), "test.profile");
  ASSERT_FALSE(p.has_value());
  EXPECT_NE(p.error().message.find("line 2: a burette profile must map op 'stop'"),
            std::string::npos)
      << p.error().message;

  auto no_end = good_lines();
  no_end.erase(no_end.begin() + 3);  // command_end
  auto q = parse_profile(join(no_end), "test.profile");
  ASSERT_FALSE(q.has_value());
  EXPECT_NE(q.error().message.find("no 'command_end' line"), std::string::npos)
      << q.error().message;

  auto stray = parse_profile("veq_profile 1\nrole burette\nsend \"X\"\n", "test.profile");
  ASSERT_FALSE(stray.has_value());
  EXPECT_NE(stray.error().message.find("line 3: 'send' belongs to an operation"), std::string::npos)
      << stray.error().message;

  auto empty = parse_profile("# nothing here\n", "test.profile");
  ASSERT_FALSE(empty.has_value());
  EXPECT_NE(empty.error().message.find("empty profile"), std::string::npos);

  auto missing = load_profile(kProfiles + "no-such.profile");
  ASSERT_FALSE(missing.has_value());
  EXPECT_EQ(missing.error().kind, ErrorKind::not_found);
}

}  // namespace
}  // namespace veq::drivers::profile
