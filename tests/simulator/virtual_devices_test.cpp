// The virtual burette and electrode, reached through the real clients over
// the in-memory transport in virtual time.
#include <gtest/gtest.h>

#include <cmath>

#include "chemistry/one_to_one.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace veq::simulator {
namespace {

Scenario virtual_devices_scenario() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  return *s;
}

struct Bench : ::testing::Test {
  drivers::VirtualClock clock;
  Scenario scenario = virtual_devices_scenario();
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;

  void start() {
    bench = std::make_unique<SimulatedBench>(scenario, clock);
    burette_link = std::make_unique<drivers::DeviceLink>(bench->burette_line(), clock, "burette");
    sensor_link =
        std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "electrode");
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
  }
};

TEST(NernstSlope, TextbookValues) {
  // RT ln10 / F = 59.16 mV at 25 °C (Harris, Quantitative Chemical Analysis,
  // 8th ed., Chapter 14, the Nernst equation's 0.059 16 V; recalled from
  // memory) and 54.20 mV at 0 °C (R and F from CODATA 2018, worked by hand).
  EXPECT_NEAR(nernst_slope_mv(25.0), 59.16, 0.005);
  EXPECT_NEAR(nernst_slope_mv(0.0), 54.20, 0.005);
}

TEST_F(Bench, DoseTakesItsTimeAndIsQuantisedToSteps) {
  scenario.burette.steps_per_cylinder = 2000;  // 10 µL steps on 20 mL
  start();
  ASSERT_TRUE(burette->identify().has_value());
  const auto before = clock.now();
  auto s = burette->dose(0.123, 6.0);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  // 0.123 mL rounds to 12 steps of 0.01 mL = 0.12 mL.
  EXPECT_NEAR(s->delivered_ml, 0.12, 1e-9);
  EXPECT_NEAR(s->cylinder_content_ml, 20.0 - 0.12, 1e-9);
  // 0.12 mL at 6 mL/min lasts 1.2 s; the client polls every 0.2 s.
  EXPECT_NEAR(drivers::to_seconds(clock.now() - before), 1.2, 0.21);
}

TEST_F(Bench, SystematicErrorIsHiddenFromTheCounter) {
  scenario.burette.systematic_error_percent = 0.5;
  start();
  ASSERT_TRUE(burette->dose(2.0, 20.0).has_value());
  EXPECT_NEAR(bench->burette().counter_ml(), 2.0, 1e-9);
  EXPECT_NEAR(bench->burette().true_delivered_ml(), 2.01, 1e-9);
  // The truth the demo prints is in burette readings: 10 mL / 1.005.
  EXPECT_NEAR(bench->true_equivalence_reading_ml(), 10.0 / 1.005, 1e-9);
}

TEST_F(Bench, RefusesOversizeDosesAndRatesAboveTheMaximum) {
  start();
  auto big = burette->start_dose(6.0, 10.0);  // largest single dose is 5 mL
  ASSERT_FALSE(big.has_value());
  EXPECT_EQ(big.error().kind, ErrorKind::device_refused);
  EXPECT_NE(big.error().message.find("over_limit"), std::string::npos);
  auto fast = burette->start_dose(1.0, 100.0);  // maximum rate 40 mL/min
  ASSERT_FALSE(fast.has_value());
  EXPECT_NE(fast.error().message.find("over_limit"), std::string::npos);
  EXPECT_NEAR(bench->burette().counter_ml(), 0.0, 1e-12);
}

TEST_F(Bench, StopsByItselfWhenTheHostFallsSilent) {
  start();
  ASSERT_TRUE(burette->arm_host_silence_stop().has_value());  // 3000 ms
  // A long dose, then the host says nothing for a minute.
  ASSERT_TRUE(burette->start_dose(5.0, 1.0).has_value());  // would take 300 s
  clock.sleep_for(std::chrono::seconds(60));
  EXPECT_FALSE(bench->burette().moving());
  // 3 s at 1 mL/min = 0.05 mL, then nothing more.
  EXPECT_NEAR(bench->burette().counter_ml(), 0.05, 0.001);
  auto s = burette->status();
  ASSERT_TRUE(s.has_value());
  EXPECT_EQ(s->fault, "host_silent");
}

TEST_F(Bench, StopsAtTheDoseTimeLimit) {
  start();
  ASSERT_TRUE(burette->arm_host_silence_stop().has_value());
  ASSERT_TRUE(burette->start_dose(1.0, 1.0).has_value());  // 60 s planned, limit 65 s
  // The host keeps talking but never asks to stop: the time limit ends it.
  for (int i = 0; i < 100; ++i) {
    clock.sleep_for(std::chrono::seconds(1));
    ASSERT_TRUE(burette->status().has_value());
  }
  EXPECT_NEAR(bench->burette().counter_ml(), 1.0, 1e-9);
  EXPECT_EQ(bench->burette().last_stop(), "completed");
}

TEST_F(Bench, StopHaltsAtOnce) {
  start();
  ASSERT_TRUE(burette->start_dose(2.0, 12.0).has_value());  // 10 s
  clock.sleep_for(std::chrono::milliseconds(2500));
  auto s = burette->stop();
  ASSERT_TRUE(s.has_value());
  EXPECT_EQ(s->state, drivers::BuretteState::idle);
  EXPECT_NEAR(s->delivered_ml, 0.5, 0.001);
  clock.sleep_for(std::chrono::seconds(30));
  EXPECT_NEAR(bench->burette().counter_ml(), 0.5, 0.001);
}

TEST_F(Bench, ElectrodeFollowsNernstAndTheChemistry) {
  scenario.electrode.noise_mv = 0.0;
  scenario.electrode.response_time_s = 0.0;
  start();
  auto r0 = sensor->read();
  ASSERT_TRUE(r0.has_value());
  const auto chemistry = scenario_chemistry(scenario);
  const double slope = nernst_slope_mv(25.0) * scenario.electrode.slope_percent / 100.0;
  EXPECT_NEAR(r0->potential_mv,
              scenario.electrode.e0_mv - slope / 2.0 * chemistry::p_metal(chemistry, 0.0), 1e-3);
  ASSERT_TRUE(burette->dose(5.0, 40.0).has_value());
  auto r1 = sensor->read();
  ASSERT_TRUE(r1.has_value());
  EXPECT_NEAR(r1->potential_mv,
              scenario.electrode.e0_mv - slope / 2.0 * chemistry::p_metal(chemistry, 5.0), 1e-3);
  EXPECT_NEAR(r1->temperature_c, 25.0, 1e-9);
}

TEST_F(Bench, ElectrodeLagsWithItsTimeConstant) {
  scenario.electrode.noise_mv = 0.0;
  scenario.electrode.response_time_s = 4.0;
  start();
  auto start_mv = sensor->read();
  ASSERT_TRUE(burette->dose(5.0, 40.0).has_value());  // 7.5 s of dosing
  const double target = bench->electrode().equilibrium_potential_mv(5.0);
  // First-order response: after t more seconds the gap shrinks by exp(-t / tau).
  auto first = sensor->read();
  clock.sleep_for(std::chrono::seconds(4));
  auto second = sensor->read();
  ASSERT_TRUE(first && second && start_mv);
  EXPECT_NEAR(second->potential_mv - target, (first->potential_mv - target) * std::exp(-1.0), 1e-3);
}

TEST_F(Bench, SameSeedSameNoise) {
  start();
  std::vector<double> a;
  for (int i = 0; i < 5; ++i)
    a.push_back(sensor->read()->potential_mv);
  drivers::VirtualClock other_clock;
  SimulatedBench other(scenario, other_clock);
  drivers::DeviceLink link(other.electrode_line(), other_clock, "electrode");
  drivers::PotentialSensorClient other_sensor(link);
  for (int i = 0; i < 5; ++i)
    EXPECT_DOUBLE_EQ(other_sensor.read()->potential_mv, a[i]);
}

TEST(Scenario, ErrorsNameTheFieldOrLine) {
  auto syntax = parse_scenario("{\n  \"sample\": {\n    \"volume_ml\": ,\n  }\n}", "bad.json");
  ASSERT_FALSE(syntax.has_value());
  EXPECT_NE(syntax.error().message.find("bad.json: line 3"), std::string::npos)
      << syntax.error().message;

  auto range = parse_scenario(
      R"({"sample": {"metal_conc_mol_per_l": 0.01, "volume_ml": -5, "log10_formation_constant": 10},
          "titrant": {"label_conc_mol_per_l": 0.05, "pka": [10.2]}})",
      "range.json");
  ASSERT_FALSE(range.has_value());
  EXPECT_NE(range.error().message.find("sample.volume_ml"), std::string::npos)
      << range.error().message;

  auto missing = parse_scenario(R"({"sample": {}})", "missing.json");
  ASSERT_FALSE(missing.has_value());
  EXPECT_NE(missing.error().message.find("sample.metal_conc_mol_per_l"), std::string::npos);

  auto fault = parse_scenario(
      R"({"sample": {"metal_conc_mol_per_l": 0.01, "volume_ml": 5, "log10_formation_constant": 10},
          "titrant": {"label_conc_mol_per_l": 0.05, "pka": [10.2]},
          "electrode": {"fault": {"kind": "gremlins"}}})",
      "fault.json");
  ASSERT_FALSE(fault.has_value());
  EXPECT_NE(fault.error().message.find("electrode.fault.kind"), std::string::npos);
}

}  // namespace
}  // namespace veq::simulator
