// The same scenario and seed give the same curve in virtual time in process
// and over pseudo-terminals in scaled real time: a short titration through
// the equivalence point, read by the real clients on both paths.
#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <memory>
#include <vector>

#include "drivers/burette_client.hpp"
#include "drivers/clock.hpp"
#include "drivers/connection.hpp"
#include "drivers/device_link.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/pseudo_terminal_bench.hpp"

namespace veq::simulator {
namespace {

using namespace std::chrono_literals;

/// The demo with noise on (seeded) but no lag or drift: with those, a
/// reading depends on when the host asks, which scaled real time cannot
/// repeat to the microsecond; noise depends only on the seed and the count.
Scenario scenario() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  s->electrode.noise_mv = 0.2;
  s->electrode.response_time_s = 0.0;
  s->electrode.drift_mv_per_min = 0.0;
  s->seed = 77;
  return *s;
}

/// Doses of 2, 2, 2, 2, 1, 0.5, 0.5, 1, 2 mL (through the equivalence at
/// 10 mL), one reading after each.
std::vector<double> titrate(drivers::BuretteClient& burette,
                            drivers::PotentialSensorClient& sensor) {
  std::vector<double> readings;
  for (double dose : {2.0, 2.0, 2.0, 2.0, 1.0, 0.5, 0.5, 1.0, 2.0}) {
    auto d = burette.dose(dose, 40.0);
    EXPECT_TRUE(d.has_value()) << (d ? "" : d.error().message);
    auto r = sensor.read();
    EXPECT_TRUE(r.has_value()) << (r ? "" : r.error().message);
    readings.push_back(r ? r->potential_mv : 0.0);
  }
  return readings;
}

TEST(SameCurve, InProcessAndOverPortsWithATimeScale) {
  // In process, virtual time.
  std::vector<double> in_process;
  {
    drivers::VirtualClock clock;
    SimulatedBench bench(scenario(), clock);
    drivers::DeviceLink b(bench.burette_line(), clock, "burette");
    drivers::DeviceLink e(bench.electrode_line(), clock, "electrode");
    drivers::BuretteClient burette(b);
    drivers::PotentialSensorClient sensor(e);
    in_process = titrate(burette, sensor);
  }
  // Over pseudo-terminals at 50 times real time.
  constexpr double kTimeScale = 50.0;
  PseudoTerminalBenchOptions options;
  options.time_scale = kTimeScale;
  auto bench = PseudoTerminalBench::start(scenario(), options);
  ASSERT_TRUE(bench.has_value()) << bench.error().message;
  drivers::ScaledClock clock{kTimeScale};
  auto b_line = drivers::open_transport((*bench)->burette_connection());
  auto e_line = drivers::open_transport((*bench)->electrode_connection());
  ASSERT_TRUE(b_line && e_line);
  drivers::DeviceLink b(**b_line, clock, "burette");
  drivers::DeviceLink e(**e_line, clock, "electrode");
  drivers::BuretteClient burette(b);
  drivers::PotentialSensorClient sensor(e);
  const std::vector<double> over_ports = titrate(burette, sensor);
  ASSERT_EQ(in_process.size(), over_ports.size());
  for (std::size_t i = 0; i < in_process.size(); ++i) {
    // Same draws, same volumes: equal to the reply's three decimals.
    EXPECT_NEAR(over_ports[i], in_process[i], 1e-9) << "reading " << i;
  }
  // And the curve does break between 9 and 11 mL (equivalence at 10.0 mL,
  // the demo's truth), so the comparison spans the steep part.
  EXPECT_GT(std::abs(in_process[7] - in_process[4]), 50.0);
}

TEST(SameCurve, ADisconnectFaultClosesThePseudoTerminal) {
  Scenario s = scenario();
  s.electrode_fault.kind = FaultKind::disconnect;
  s.electrode_fault.after_s = 0.0;
  PseudoTerminalBenchOptions options;
  options.time_scale = 50.0;
  auto bench = PseudoTerminalBench::start(s, options);
  ASSERT_TRUE(bench.has_value()) << bench.error().message;
  drivers::ScaledClock clock{50.0};
  auto line = drivers::open_transport((*bench)->electrode_connection());
  ASSERT_TRUE(line.has_value());
  drivers::LinkOptions link_options;
  link_options.reply_timeout = 300ms;
  drivers::DeviceLink e(**line, clock, "electrode", link_options);
  drivers::PotentialSensorClient sensor(e);
  auto first = sensor.read();
  ASSERT_FALSE(first.has_value());
  // The port is gone: the host hears nothing more, whatever it asks.
  auto second = sensor.read();
  ASSERT_FALSE(second.has_value());
  EXPECT_TRUE(second.error().kind == ErrorKind::disconnected ||
              second.error().kind == ErrorKind::io || second.error().kind == ErrorKind::timeout)
      << second.error().message;
}

TEST(SameCurve, AScenarioFileReplaysACsvBesideIt) {
  const auto dir = std::filesystem::temp_directory_path() / "veq_sim8_replay";
  std::filesystem::create_directories(dir);
  {
    std::ofstream csv(dir / "stored.csv");
    csv << "volume_ml;potential_mv\n0;80\n1;90\n2;140\n";
    std::ofstream json(dir / "replay.json");
    json << R"({"sample": {"metal_conc_mol_per_l": 0.01, "volume_ml": 25,
        "log10_formation_constant": 10.7}, "titrant": {"label_conc_mol_per_l": 0.05, "pka": [2]},
        "replay": {"file": "stored.csv", "role": "electrode"}})";
  }
  auto s = load_scenario((dir / "replay.json").string());
  ASSERT_TRUE(s.has_value()) << s.error().message;
  drivers::VirtualClock clock;
  SimulatedBench bench(*s, clock);
  EXPECT_EQ(bench.electrode().equilibrium_potential_mv(1.0), 90.0);
  EXPECT_NEAR(bench.electrode().equilibrium_potential_mv(1.5), 115.0, 1e-12);
  // A missing file is named.
  {
    std::ofstream json(dir / "missing.json");
    json << R"({"sample": {"metal_conc_mol_per_l": 0.01, "volume_ml": 25,
        "log10_formation_constant": 10.7}, "titrant": {"label_conc_mol_per_l": 0.05, "pka": [2]},
        "replay": {"file": "nowhere.csv"}})";
  }
  auto missing = load_scenario((dir / "missing.json").string());
  ASSERT_FALSE(missing.has_value());
  EXPECT_NE(missing.error().message.find("nowhere.csv"), std::string::npos);
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace veq::simulator
