// Byte-level fixtures for every native message of every role
// (docs/protocol.md): each request as the clients' pure message functions
// build it, and each reply as the clients' pure parse functions read it.
// The expected checksums were computed independently with Python's standard
// library, binascii.crc_hqx(body, 0xFFFF) (CRC-16/CCITT-FALSE), over the body
// written out by hand; the checksum column below is that output.
#include <gtest/gtest.h>

#include <cmath>
#include <string>

#include "drivers/auxiliary_doser_client.hpp"
#include "drivers/balance_client.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/photometer_client.hpp"
#include "drivers/sample_changer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "drivers/stirrer_client.hpp"

namespace veq::drivers {
namespace {

const std::string kDevice = "fixture";

/// The line a body makes with its independently computed checksum.
std::string line(const std::string& body, const char* crc) {
  return body + "*" + crc + "\n";
}

/// The bytes of a request with a sequence number, as DeviceLink sends it.
std::string bytes_of(protocol::Message m, std::uint32_t sequence) {
  m.sequence = sequence;
  return protocol::encode(m);
}

/// A reply line parsed back into a message (its line end removed).
protocol::Message parsed(const std::string& bytes) {
  auto m = protocol::parse(std::string_view(bytes).substr(0, bytes.size() - 1));
  EXPECT_TRUE(m.has_value()) << (m ? "" : m.error().message);
  return m ? *m : protocol::Message{};
}

// ---- burette ----

TEST(BuretteMessages, RequestBytes) {
  EXPECT_EQ(bytes_of(burette_messages::identify(), 3), line("3 identify ", "46D8"));
  EXPECT_EQ(bytes_of(burette_messages::dose(0.05, 10.0, 5300), 4),
            line("4 dose volume_ml=0.05000 rate_ml_per_min=10.0000 limit_ms=5300 ", "2463"));
  EXPECT_EQ(bytes_of(burette_messages::fill(40.0), 5),
            line("5 fill rate_ml_per_min=40.0000 ", "70DA"));
  EXPECT_EQ(bytes_of(burette_messages::status(), 6), line("6 status ", "A3D7"));
  EXPECT_EQ(bytes_of(burette_messages::stop(), 7), line("7 stop ", "64BE"));
  EXPECT_EQ(bytes_of(burette_messages::valve(2), 8), line("8 valve port=2 ", "3366"));
  EXPECT_EQ(bytes_of(burette_messages::reset_counter(), 9), line("9 reset_counter ", "844A"));
  EXPECT_EQ(bytes_of(burette_messages::host_silence_limit(3000), 10),
            line("10 host_silence_limit ms=3000 ", "44D8"));
}

TEST(BuretteMessages, IdentifyReplyStatesCapabilities) {
  const auto m = parsed(line(
      "3 ok role=burette model=\"Stonebridge bench\" protocol=2 cylinder_ml=20.0000 "
      "steps_per_cylinder=40000 max_rate_ml_per_min=40.000 max_dose_ml=5.0000 "
      "max_fill_rate_ml_per_min=60.000 ports=2 serial_number=SB-0042 features=fill,valve,ping ",
      "9F72"));
  auto info = burette_messages::parse_identity(m, kDevice);
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_EQ(info->model, "Stonebridge bench");
  EXPECT_DOUBLE_EQ(info->cylinder_ml, 20.0);
  EXPECT_DOUBLE_EQ(info->steps_per_cylinder, 40000.0);
  EXPECT_DOUBLE_EQ(info->resolution_ml(), 0.0005);
  EXPECT_DOUBLE_EQ(info->max_rate_ml_per_min, 40.0);
  EXPECT_DOUBLE_EQ(info->max_fill_rate_ml_per_min, 60.0);
  EXPECT_DOUBLE_EQ(info->max_dose_ml, 5.0);
  EXPECT_EQ(info->ports, 2);
  EXPECT_EQ(info->serial_number, "SB-0042");
  EXPECT_TRUE(info->supports("valve"));
  EXPECT_FALSE(info->supports("reset_counter"));
}

TEST(BuretteMessages, StatusRepliesWithPortAndFaults) {
  auto s = burette_messages::parse_status(
      parsed(line("6 ok state=dosing cylinder_ml=19.95000 delivered_ml=0.05000 "
                  "reservoir_ml=980.00 last_stop=completed fault=none port=2 ",
                  "22EF")),
      kDevice);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_EQ(s->state, BuretteState::dosing);
  EXPECT_DOUBLE_EQ(s->cylinder_content_ml, 19.95);
  EXPECT_DOUBLE_EQ(s->delivered_ml, 0.05);
  EXPECT_DOUBLE_EQ(s->reservoir_ml, 980.0);
  EXPECT_EQ(s->last_stop, "completed");
  EXPECT_EQ(s->fault, "none");
  EXPECT_EQ(s->port, 2);

  auto fault = burette_messages::parse_status(
      parsed(line("7 ok state=fault cylinder_ml=12.50000 delivered_ml=7.50000 last_stop=fault "
                  "fault=stalled ",
                  "28E2")),
      kDevice);
  ASSERT_TRUE(fault.has_value());
  EXPECT_EQ(fault->state, BuretteState::fault);
  EXPECT_EQ(fault->fault, "stalled");
  EXPECT_DOUBLE_EQ(fault->reservoir_ml, -1.0);  // not reported
}

TEST(BuretteMessages, ErrorReplyBytes) {
  EXPECT_EQ(protocol::encode(
                protocol::error_reply(4, "empty", "the cylinder holds only 0.0200 mL; fill first")),
            line("4 error reason=empty message=\"the cylinder holds only 0.0200 mL; fill first\" ",
                 "12C8"));
}

TEST(BuretteMessages, WrongRoleAndBadFieldsAreNamed) {
  auto meter = burette_messages::parse_identity(
      parsed(line("1 ok role=potential_sensor model=\"veq virtual millivolt meter\" "
                  "electrode=\"calcium ion-selective, virtual\" protocol=2 serial_number=M-7 "
                  "features=stream,ping ",
                  "EA6D")),
      kDevice);
  ASSERT_FALSE(meter.has_value());
  EXPECT_EQ(meter.error().kind, ErrorKind::invalid_input);
  EXPECT_NE(meter.error().message.find("potential_sensor"), std::string::npos);
  protocol::Message bad = protocol::ok_reply(1);
  bad.add("state", "idle").add("cylinder_ml", "lots").add("delivered_ml", "0");
  auto s = burette_messages::parse_status(bad, kDevice);
  ASSERT_FALSE(s.has_value());
  EXPECT_EQ(s.error().kind, ErrorKind::garbled);
  EXPECT_NE(s.error().message.find("cylinder_ml"), std::string::npos);
}

// ---- potentiometric sensor ----

TEST(SensorMessages, RequestBytes) {
  EXPECT_EQ(bytes_of(sensor_messages::read(), 11), line("11 read ", "1790"));
  EXPECT_EQ(bytes_of(sensor_messages::stream(100), 12), line("12 stream interval_ms=100 ", "E30F"));
  EXPECT_EQ(bytes_of(sensor_messages::identify(), 3), line("3 identify ", "46D8"));
}

TEST(SensorMessages, ReadingWithPhAndStreamedReading) {
  auto r = sensor_messages::parse_reading(
      parsed(line("11 ok potential_mv=-12.345 temperature_c=25.00 ph=7.012 ", "E544")), kDevice);
  ASSERT_TRUE(r.has_value()) << r.error().message;
  EXPECT_DOUBLE_EQ(r->potential_mv, -12.345);
  EXPECT_DOUBLE_EQ(r->temperature_c, 25.0);
  ASSERT_TRUE(r->ph.has_value());
  EXPECT_DOUBLE_EQ(*r->ph, 7.012);

  const auto streamed = parsed(line("0 reading potential_mv=101.250 temperature_c=24.90 ", "7510"));
  EXPECT_EQ(streamed.sequence, 0u);
  EXPECT_EQ(streamed.word, "reading");
  auto s = sensor_messages::parse_reading(streamed, kDevice);
  ASSERT_TRUE(s.has_value());
  EXPECT_DOUBLE_EQ(s->potential_mv, 101.25);
  EXPECT_FALSE(s->ph.has_value());
}

TEST(SensorMessages, IdentifyNamesTheElectrode) {
  auto info = sensor_messages::parse_identity(
      parsed(line("1 ok role=potential_sensor model=\"veq virtual millivolt meter\" "
                  "electrode=\"calcium ion-selective, virtual\" protocol=2 serial_number=M-7 "
                  "features=stream,ping ",
                  "EA6D")),
      kDevice);
  ASSERT_TRUE(info.has_value());
  EXPECT_EQ(info->electrode, "calcium ion-selective, virtual");
  EXPECT_EQ(info->serial_number, "M-7");
  EXPECT_TRUE(info->supports("stream"));
}

// ---- auxiliary doser ----

TEST(DoserMessages, RequestBytes) {
  EXPECT_EQ(bytes_of(doser_messages::dose(Reagent::buffer, 2.5, 10.0, 20000), 13),
            line("13 dose reagent=buffer volume_ml=2.5000 rate_ml_per_min=10.000 limit_ms=20000 ",
                 "69B9"));
  EXPECT_EQ(bytes_of(doser_messages::status(), 14), line("14 status ", "5E25"));
  EXPECT_EQ(bytes_of(doser_messages::stop(), 15), line("15 stop ", "C5A2"));
  EXPECT_EQ(bytes_of(doser_messages::host_silence_limit(3000), 16),
            line("16 host_silence_limit ms=3000 ", "46CE"));
}

TEST(DoserMessages, IdentifyAndStatus) {
  auto info = doser_messages::parse_identity(
      parsed(line("1 ok role=auxiliary_doser model=D4 protocol=2 "
                  "reagents=buffer,indicator,water max_dose_ml=5.000 max_rate_ml_per_min=20.000 ",
                  "E72E")),
      kDevice);
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_TRUE(info->has(Reagent::buffer));
  EXPECT_TRUE(info->has(Reagent::indicator));
  EXPECT_TRUE(info->has(Reagent::water));
  EXPECT_FALSE(info->has(Reagent::masking_agent));
  EXPECT_DOUBLE_EQ(info->max_dose_ml, 5.0);
  EXPECT_DOUBLE_EQ(info->max_rate_ml_per_min, 20.0);

  auto s = doser_messages::parse_status(
      parsed(line("14 ok state=dosing reagent=indicator dosed_ml=0.1250 reservoir_ml=99.88 "
                  "last_stop=completed fault=none ",
                  "5D72")),
      kDevice);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_EQ(s->state, DoserState::dosing);
  ASSERT_TRUE(s->reagent.has_value());
  EXPECT_EQ(*s->reagent, Reagent::indicator);
  EXPECT_DOUBLE_EQ(s->dosed_ml, 0.125);
  EXPECT_DOUBLE_EQ(s->reservoir_ml, 99.88);
}

TEST(DoserMessages, AcidAndBaseAdjustThePh) {
  // Stored with runs: the values are append-only (acid 5, base 6).
  EXPECT_EQ(static_cast<int>(Reagent::acid), 5);
  EXPECT_EQ(static_cast<int>(Reagent::base), 6);
  EXPECT_EQ(reagent_from_name("acid"), Reagent::acid);
  EXPECT_EQ(reagent_from_name("base"), Reagent::base);
  EXPECT_FALSE(reagent_from_name("alkali").has_value());
  EXPECT_EQ(
      bytes_of(doser_messages::dose(Reagent::acid, 0.5, 5.0, 11000), 17),
      line("17 dose reagent=acid volume_ml=0.5000 rate_ml_per_min=5.000 limit_ms=11000 ", "2D6E"));
  EXPECT_EQ(
      bytes_of(doser_messages::dose(Reagent::base, 1.25, 5.0, 20000), 18),
      line("18 dose reagent=base volume_ml=1.2500 rate_ml_per_min=5.000 limit_ms=20000 ", "753C"));
  auto info = doser_messages::parse_identity(
      parsed(line("1 ok role=auxiliary_doser model=D6 protocol=2 reagents=buffer,acid,base "
                  "max_dose_ml=5.000 max_rate_ml_per_min=20.000 ",
                  "C72C")),
      kDevice);
  ASSERT_TRUE(info.has_value()) << info.error().message;
  EXPECT_TRUE(info->has(Reagent::acid));
  EXPECT_TRUE(info->has(Reagent::base));
  EXPECT_FALSE(info->has(Reagent::water));
  auto s = doser_messages::parse_status(
      parsed(line("14 ok state=idle reagent=base dosed_ml=0.5000 reservoir_ml=249.50 "
                  "last_stop=completed fault=none ",
                  "D50D")),
      kDevice);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  ASSERT_TRUE(s->reagent.has_value());
  EXPECT_EQ(*s->reagent, Reagent::base);
}

// ---- photometric sensor ----

TEST(PhotometerMessages, RequestBytes) {
  EXPECT_EQ(bytes_of(photometer_messages::wavelength(745.0), 17),
            line("17 wavelength nm=745.0 ", "47D5"));
  EXPECT_EQ(bytes_of(photometer_messages::zero(), 18), line("18 zero ", "F8B8"));
  EXPECT_EQ(bytes_of(photometer_messages::read(), 19), line("19 read ", "843D"));
}

TEST(PhotometerMessages, ReadingAndTransmittanceFromAbsorbance) {
  auto r = photometer_messages::parse_reading(
      parsed(line("19 ok absorbance=0.43210 transmittance_percent=36.9743 wavelength_nm=745.0 ",
                  "D83C")),
      kDevice);
  ASSERT_TRUE(r.has_value()) << r.error().message;
  EXPECT_DOUBLE_EQ(r->absorbance, 0.4321);
  EXPECT_DOUBLE_EQ(r->transmittance_percent, 36.9743);
  EXPECT_DOUBLE_EQ(r->wavelength_nm, 745.0);
  // A device that gives absorbance only: T = 100 % x 10^-A, so A = 1 is 10 %.
  auto a_only = photometer_messages::parse_reading(
      parsed(line("19 ok absorbance=1.00000 ", "7E6E")), kDevice);
  ASSERT_TRUE(a_only.has_value());
  EXPECT_NEAR(a_only->transmittance_percent, 10.0, 1e-12);
  auto info = photometer_messages::parse_identity(
      parsed(line("1 ok role=photometric_sensor model=P1 protocol=2 min_wavelength_nm=380.0 "
                  "max_wavelength_nm=800.0 path_length_cm=1.000 ",
                  "67E1")),
      kDevice);
  ASSERT_TRUE(info.has_value());
  EXPECT_DOUBLE_EQ(info->min_wavelength_nm, 380.0);
  EXPECT_DOUBLE_EQ(info->max_wavelength_nm, 800.0);
  EXPECT_DOUBLE_EQ(info->path_length_cm, 1.0);
}

// ---- balance ----

TEST(BalanceMessages, RequestBytesAndReading) {
  EXPECT_EQ(bytes_of(balance_messages::read(), 20), line("20 read ", "6784"));
  EXPECT_EQ(bytes_of(balance_messages::tare(), 21), line("21 tare ", "F193"));
  auto r = balance_messages::parse_reading(parsed(line("20 ok mass_g=12.3456 stable=yes ", "897B")),
                                           kDevice);
  ASSERT_TRUE(r.has_value());
  EXPECT_DOUBLE_EQ(r->mass_g, 12.3456);
  EXPECT_TRUE(r->stable);
  auto info = balance_messages::parse_identity(
      parsed(line("1 ok role=balance model=B2 protocol=2 capacity_g=220.0000 "
                  "readability_g=0.0001000 ",
                  "3510")),
      kDevice);
  ASSERT_TRUE(info.has_value());
  EXPECT_DOUBLE_EQ(info->capacity_g, 220.0);
  EXPECT_DOUBLE_EQ(info->readability_g, 0.0001);
  protocol::Message maybe = protocol::ok_reply(1);
  maybe.add("mass_g", "1.0").add("stable", "maybe");
  EXPECT_EQ(balance_messages::parse_reading(maybe, kDevice).error().kind, ErrorKind::garbled);
}

// ---- stirrer ----

TEST(StirrerMessages, RequestBytesAndStatus) {
  EXPECT_EQ(bytes_of(stirrer_messages::speed(600.0), 22), line("22 speed rpm=600 ", "1378"));
  EXPECT_EQ(bytes_of(stirrer_messages::status(), 23), line("23 status ", "5E41"));
  auto s = stirrer_messages::parse_status(
      parsed(line("23 ok speed_rpm=412 target_rpm=600 fault=none ", "A42F")), kDevice);
  ASSERT_TRUE(s.has_value());
  EXPECT_DOUBLE_EQ(s->speed_rpm, 412.0);
  EXPECT_DOUBLE_EQ(s->target_rpm, 600.0);
  EXPECT_EQ(s->fault, "none");
  auto info = stirrer_messages::parse_identity(
      parsed(line("1 ok role=stirrer model=S3 protocol=2 max_speed_rpm=1500 min_speed_rpm=100 ",
                  "38C0")),
      kDevice);
  ASSERT_TRUE(info.has_value());
  EXPECT_DOUBLE_EQ(info->max_speed_rpm, 1500.0);
  EXPECT_DOUBLE_EQ(info->min_speed_rpm, 100.0);
}

// ---- sample changer ----

TEST(ChangerMessages, RequestBytesAndStatus) {
  EXPECT_EQ(bytes_of(changer_messages::move(7), 24), line("24 move position=7 ", "A3D4"));
  EXPECT_EQ(bytes_of(changer_messages::lower(), 25), line("25 lower ", "4BC7"));
  EXPECT_EQ(bytes_of(changer_messages::raise(), 26), line("26 raise ", "04E7"));
  EXPECT_EQ(bytes_of(changer_messages::rinse(10.0), 27), line("27 rinse seconds=10.0 ", "D846"));
  EXPECT_EQ(bytes_of(changer_messages::status(), 28), line("28 status ", "5AFA"));
  EXPECT_EQ(bytes_of(changer_messages::stop(), 29), line("29 stop ", "5FBC"));
  auto s = changer_messages::parse_status(
      parsed(line("28 ok state=moving position=0 head=up fault=none ", "D37D")), kDevice);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_EQ(s->state, ChangerState::moving);
  EXPECT_EQ(s->position, 0);
  EXPECT_EQ(s->head, HeadPosition::up);
  auto info = changer_messages::parse_identity(
      parsed(line("1 ok role=sample_changer model=C4 protocol=2 positions=12 rinse=yes ", "A5ED")),
      kDevice);
  ASSERT_TRUE(info.has_value());
  EXPECT_EQ(info->positions, 12);
  EXPECT_TRUE(info->has_rinse);
}

TEST(CommonMessages, PingBytes) {
  protocol::Message ping;
  ping.word = "ping";
  EXPECT_EQ(bytes_of(ping, 30), line("30 ping ", "5284"));
}

}  // namespace
}  // namespace veq::drivers
