// One sample on its own simulated bench (burette and electrode in memory,
// virtual time), titrated into an in-memory store: the set-up shared by the
// whole-titration tests.
#pragma once

#include <gtest/gtest.h>

#include <memory>
#include <string>
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

/// Builds a simulated bench on `clock` and the host's burette and electrode
/// clients over its memory lines, into the members of the same names of
/// `rack` (bench, burette_link, sensor_link, burette, sensor), which must be
/// declared after the clock so that they are destroyed before it.
template <class Rack>
void connect_simulated_bench(Rack& rack, const simulator::Scenario& scenario, drivers::Clock& clock,
                             const std::string& burette_name = "burette") {
  rack.bench = std::make_unique<simulator::SimulatedBench>(scenario, clock);
  rack.burette_link =
      std::make_unique<drivers::DeviceLink>(rack.bench->burette_line(), clock, burette_name);
  rack.sensor_link =
      std::make_unique<drivers::DeviceLink>(rack.bench->electrode_line(), clock, "electrode");
  rack.burette = std::make_unique<drivers::BuretteClient>(*rack.burette_link);
  rack.sensor = std::make_unique<drivers::PotentialSensorClient>(*rack.sensor_link);
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
    connect_simulated_bench(*this, scenario, clock);
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
