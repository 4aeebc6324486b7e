// Whole titrations over real serial lines: the simulated bench served on
// pseudo-terminals, the controller on its own worker thread with a scaled
// real clock, through the serial transport.
#include <gtest/gtest.h>

#include "controller/run_worker.hpp"
#include "controller/store/sqlite_store.hpp"
#include "drivers/connection.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/pseudo_terminal_bench.hpp"

namespace veq::controller {
namespace {

// 100 device seconds per real second: a 6-minute titration lasts ~4 s.
constexpr double kTimeScale = 100.0;

simulator::Scenario short_scenario() {
  auto s = *simulator::parse_scenario(simulator::builtin_scenario("demo_calcium"), "demo");
  // A small aliquot: equivalence near 2.5 mL keeps the titration short.
  s.sample.volume_ml = 10.0;
  s.sample.metal_conc_mol_per_l = 0.01234;
  return s;
}

struct OverPty {
  std::unique_ptr<simulator::PseudoTerminalBench> sim;
  std::unique_ptr<drivers::Transport> burette_line, electrode_line;
  drivers::ScaledClock clock{kTimeScale};
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<store::SqliteStore> store =
      std::move(store::SqliteStore::open(":memory:")).value();
  SampleDescription sample;
  TitrationMethod method;

  explicit OverPty(const simulator::Scenario& scenario) {
    simulator::PseudoTerminalBenchOptions options;
    options.time_scale = kTimeScale;
    sim = std::move(simulator::PseudoTerminalBench::start(scenario, options)).value();
    burette_line = std::move(drivers::open_transport(sim->burette_connection())).value();
    electrode_line = std::move(drivers::open_transport(sim->electrode_connection())).value();
    burette_link = std::make_unique<drivers::DeviceLink>(*burette_line, clock, "burette");
    sensor_link = std::make_unique<drivers::DeviceLink>(*electrode_line, clock, "electrode");
    drivers::BuretteClientOptions burette_options;
    burette_options.host_silence_limit_ms = 20000;  // 200 ms real at 100x
    burette = std::make_unique<drivers::BuretteClient>(*burette_link, burette_options);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
    sample.sample_id = "over-pty";
    sample.sample_volume_ml = scenario.sample.volume_ml;
    sample.titrant_conc_mol_per_l = scenario.titrant.label_conc_mol_per_l;
    method.max_volume_ml = 6.0;
    method.volume_past_endpoint_ml = 0.5;
  }

  RunOutcome run() {
    Instruments instruments{*burette, *sensor, clock};
    RunWorker worker(instruments, *store, sample, method);
    worker.start();
    return worker.wait();
  }

  bool burette_moving() {
    bool moving = true;
    sim->with_bench([&](simulator::SimulatedBench& b) { moving = b.burette().moving(); });
    return moving;
  }
};

TEST(TitrationOverPseudoTerminals, FindsTheEquivalenceWithinTwoTenthsOfAPercent) {
  OverPty bench(short_scenario());
  const auto outcome = bench.run();
  ASSERT_EQ(outcome.status, store::RunStatus::completed) << outcome.reason;
  // Read on the serving thread: it may still be answering the host's last
  // exchanges, and true_equivalence_reading_ml() takes no lock of its own
  // (a data race under ThreadSanitizer).
  double truth = 0.0;
  bench.sim->with_bench(
      [&](simulator::SimulatedBench& b) { truth = b.true_equivalence_reading_ml(); });
  EXPECT_NEAR(truth, 2.468, 1e-9);  // 10 mL * 0.01234 mol/L / 0.05 mol/L
  EXPECT_LT(std::abs(outcome.endpoint->volume_ml - truth) / truth, 0.002)
      << outcome.endpoint->volume_ml;
  EXPECT_EQ(bench.store->load_points(outcome.run_id)->size(), outcome.point_count);
}

// Faults begin 300 device seconds (3 real seconds) after the simulator starts:
// late enough that a loaded machine has stored several points by then, early
// enough that the titration (about 660 device seconds) is still running.
void expect_safe_end(OverPty& bench, const RunOutcome& outcome, const char* says) {
  EXPECT_EQ(outcome.status, store::RunStatus::failed);
  EXPECT_NE(outcome.reason.find(says), std::string::npos) << outcome.reason;
  auto points = bench.store->load_points(outcome.run_id);
  EXPECT_GT(points->size(), 3u);
  EXPECT_EQ(points->size(), outcome.point_count);
  EXPECT_FALSE(bench.burette_moving());
}

TEST(TitrationOverPseudoTerminals, GarbledReplyEndsTheRunSafely) {
  auto scenario = short_scenario();
  scenario.electrode_fault = {simulator::FaultKind::garbage, 300.0};
  OverPty bench(scenario);
  expect_safe_end(bench, bench.run(), "garbled");
}

TEST(TitrationOverPseudoTerminals, PartialLineEndsTheRunSafely) {
  auto scenario = short_scenario();
  scenario.electrode_fault = {simulator::FaultKind::partial_line, 300.0};
  OverPty bench(scenario);
  expect_safe_end(bench, bench.run(), "timeout");
}

TEST(TitrationOverPseudoTerminals, SilentElectrodeEndsTheRunSafely) {
  auto scenario = short_scenario();
  scenario.electrode_fault = {simulator::FaultKind::silence, 300.0};
  OverPty bench(scenario);
  expect_safe_end(bench, bench.run(), "timeout");
}

}  // namespace
}  // namespace veq::controller
