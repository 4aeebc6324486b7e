// One sample on its own simulated bench (burette and electrode in memory,
// virtual time), titrated into an in-memory store: the set-up shared by the
// whole-titration tests.
#pragma once

#include <gtest/gtest.h>

#include <memory>
#include <utility>

#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace veq::controller::testing {

/// The built-in demo scenario (invented calcium sample, 10.000 mL).
inline simulator::Scenario demo_scenario() {
  auto s = simulator::parse_scenario(simulator::builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  return *s;
}

struct Trial {
  simulator::Scenario scenario;
  drivers::VirtualClock clock;
  std::unique_ptr<simulator::SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<store::SqliteStore> store;
  SampleDescription sample;
  TitrationMethod method;

  explicit Trial(simulator::Scenario s) : scenario(std::move(s)) {
    bench = std::make_unique<simulator::SimulatedBench>(scenario, clock);
    burette_link = std::make_unique<drivers::DeviceLink>(bench->burette_line(), clock, "burette");
    sensor_link =
        std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "electrode");
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
    store = std::move(store::SqliteStore::open(":memory:")).value();
    sample.sample_id = "trial";
    sample.sample_volume_ml = scenario.sample.volume_ml;
    sample.titrant_conc_mol_per_l = scenario.titrant.label_conc_mol_per_l;
    method.max_volume_ml = 20.0;
  }

  RunOutcome run(RunControl* control = nullptr, RunObserver* observer = nullptr) {
    Instruments instruments{*burette, *sensor, clock};
    return run_titration(instruments, *store, sample, method, observer, control);
  }
};

}  // namespace veq::controller::testing
