// Byte-level fixtures for veq's native line protocol (docs/protocol.md).
// Expected checksums were computed independently with Python's standard
// library: binascii.crc_hqx(body, 0xFFFF), which is CRC-16/CCITT-FALSE.
#include <gtest/gtest.h>

#include "drivers/native_protocol.hpp"

namespace veq::drivers::protocol {
namespace {

TEST(Crc16Ccitt, StandardCheckValue) {
  // The catalogue check value of CRC-16/CCITT-FALSE for "123456789" is 0x29B1.
  EXPECT_EQ(crc16_ccitt("123456789"), 0x29B1);
}

TEST(Encode, DoseRequestBytes) {
  Message m;
  m.sequence = 7;
  m.word = "dose";
  m.add("volume_ml", 0.05, 5).add("rate_ml_per_min", 10.0, 4).add("limit_ms", "5300");
  EXPECT_EQ(encode(m), "7 dose volume_ml=0.05000 rate_ml_per_min=10.0000 limit_ms=5300 *1067\n");
}

TEST(Encode, StatusReplyBytes) {
  Message m = ok_reply(7);
  m.add("state", "idle").add("cylinder_ml", 19.95, 5).add("delivered_ml", 0.05, 5);
  EXPECT_EQ(encode(m), "7 ok state=idle cylinder_ml=19.95000 delivered_ml=0.05000 *F950\n");
}

TEST(Encode, ErrorReplyQuotesText) {
  EXPECT_EQ(encode(error_reply(3, "busy", "the motor is still moving")),
            "3 error reason=busy message=\"the motor is still moving\" *7AC2\n");
}

TEST(Parse, DoseRequest) {
  auto m = parse("7 dose volume_ml=0.05000 rate_ml_per_min=10.0000 limit_ms=5300 *1067");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_EQ(m->sequence, 7u);
  EXPECT_EQ(m->word, "dose");
  ASSERT_EQ(m->fields.size(), 3u);
  EXPECT_DOUBLE_EQ(*m->number("volume_ml"), 0.05);
  EXPECT_DOUBLE_EQ(*m->number("rate_ml_per_min"), 10.0);
  EXPECT_DOUBLE_EQ(*m->number("limit_ms"), 5300.0);
}

TEST(Parse, AcceptsCarriageReturnLineEnd) {
  auto m = parse("7 ok state=idle cylinder_ml=19.95000 delivered_ml=0.05000 *F950\r");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_EQ(*m->text("state"), "idle");
}

TEST(Parse, QuotedTextRoundTrip) {
  Message m;
  m.sequence = 65535;
  m.word = "ok";
  m.add("model", "burette \"B\" \\ 20 mL = fine*");
  auto bytes = encode(m);
  ASSERT_EQ(bytes.back(), '\n');
  bytes.pop_back();
  auto back = parse(bytes);
  ASSERT_TRUE(back.has_value()) << back.error().message;
  EXPECT_EQ(back->sequence, 65535u);
  EXPECT_EQ(*back->text("model"), "burette \"B\" \\ 20 mL = fine*");
}

TEST(Parse, RejectsBadChecksumWithColumn) {
  // One digit of the volume changed in transit: 0.05000 -> 0.06000.
  auto m = parse("7 dose volume_ml=0.06000 rate_ml_per_min=10.0000 limit_ms=5300 *1067");
  ASSERT_FALSE(m.has_value());
  EXPECT_EQ(m.error().kind, ErrorKind::garbled);
  EXPECT_NE(m.error().message.find("checksum mismatch"), std::string::npos);
  EXPECT_NE(m.error().message.find("column 64"), std::string::npos) << m.error().message;
}

TEST(Parse, RejectsEveryKindOfGarbage) {
  const char* bad[] = {
      "",                               // empty line
      "7 ok",                           // no checksum
      "7 ok *12",                       // short checksum
      "7 ok *12g4",                     // not hex
      "\x01\xff\x10garbage\x7f *0000",  // line noise
      "x ok *0000",                     // checksum wrong and no sequence
  };
  for (const char* line : bad) {
    auto m = parse(line);
    EXPECT_FALSE(m.has_value()) << "accepted: " << line;
    if (!m) {
      EXPECT_EQ(m.error().kind, ErrorKind::garbled);
    }
  }
}

/// Builds a line with a correct checksum around any body, to test the syntax
/// checks behind the checksum.
std::string with_checksum(const std::string& body) {
  char crc[8];
  std::snprintf(crc, sizeof crc, "*%04X", static_cast<unsigned>(crc16_ccitt(body)));
  return body + crc;
}

TEST(Parse, RejectsBadSyntaxBehindAGoodChecksum) {
  const char* bodies[] = {
      "7  ok ",                 // double space
      "70000 ok ",              // sequence out of range
      "7 ok volume_ml ",        // field without '='
      "7 ok volume_ml= ",       // empty value
      "7 ok Volume=1 ",         // upper case name
      "7 ok text=\"unclosed ",  // unterminated quote
      "7 ok",                   // no space before '*'
  };
  for (const char* body : bodies) {
    auto m = parse(with_checksum(body));
    EXPECT_FALSE(m.has_value()) << "accepted: " << body;
  }
}

TEST(Message, NumberErrorsNameTheField) {
  auto m = parse(with_checksum("7 ok potential_mv=abc "));
  ASSERT_TRUE(m.has_value());
  auto v = m->number("potential_mv");
  ASSERT_FALSE(v.has_value());
  EXPECT_NE(v.error().message.find("potential_mv"), std::string::npos);
  auto missing = m->number("temperature_c");
  ASSERT_FALSE(missing.has_value());
  EXPECT_NE(missing.error().message.find("temperature_c"), std::string::npos);
  auto nan = parse(with_checksum("7 ok potential_mv=nan "));
  ASSERT_TRUE(nan.has_value());
  EXPECT_FALSE(nan->number("potential_mv").has_value());
}

TEST(FormatNumber, FixedDecimalsWithoutNegativeZero) {
  EXPECT_EQ(format_number(0.05, 5), "0.05000");
  EXPECT_EQ(format_number(-0.0000001, 3), "0.000");
  EXPECT_EQ(format_number(-12.3456, 2), "-12.35");
  EXPECT_EQ(format_number(19.95, 5), "19.95000");
}

}  // namespace
}  // namespace veq::drivers::protocol
