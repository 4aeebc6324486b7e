// A titration on its worker thread against simulated instruments running on a
// scaled real clock: abort from another thread stops the burette at once.
#include <gtest/gtest.h>

#include <chrono>
#include <thread>

#include "controller/run_worker.hpp"
#include "controller/store/sqlite_store.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace veq::controller {
namespace {

struct Worker : ::testing::Test {
  // 400 clock seconds per real second: the 30-minute demo titration lasts ~5 s.
  drivers::ScaledClock clock{400.0};
  simulator::Scenario scenario =
      *simulator::parse_scenario(simulator::builtin_scenario("demo_calcium"), "demo");
  simulator::SimulatedBench bench{scenario, clock};
  drivers::DeviceLink burette_link{bench.burette_line(), clock, "burette"};
  drivers::DeviceLink sensor_link{bench.electrode_line(), clock, "electrode"};
  drivers::BuretteClient burette{burette_link};
  drivers::PotentialSensorClient sensor{sensor_link};
  Instruments instruments{burette, sensor, clock};
  std::unique_ptr<store::SqliteStore> store =
      std::move(store::SqliteStore::open(":memory:")).value();
  SampleDescription sample;

  Worker() {
    sample.sample_id = "worker";
    sample.sample_volume_ml = scenario.sample.volume_ml;
    sample.titrant_conc_mol_per_l = scenario.titrant.label_conc_mol_per_l;
  }
};

TEST_F(Worker, AbortFromAnotherThreadStopsTheBuretteAndKeepsThePoints) {
  TitrationMethod method;
  method.dosing.increment_ml = 0.5;  // long doses, so an abort is likely to catch one
  method.dose_rate_ml_per_min = 2.0;
  RunWorker worker(instruments, *store, sample, method);
  worker.start();
  std::this_thread::sleep_for(std::chrono::milliseconds(400));  // ~160 s of run time
  ASSERT_FALSE(worker.finished());
  worker.abort();
  // The stop was sent from this thread: the motor is still now.
  EXPECT_FALSE(bench.burette().moving());
  const auto outcome = worker.wait();
  EXPECT_EQ(outcome.status, store::RunStatus::aborted);
  EXPECT_NE(outcome.reason.find("aborted by the operator"), std::string::npos);
  auto points = store->load_points(outcome.run_id);
  ASSERT_TRUE(points.has_value());
  EXPECT_GE(points->size(), 1u);
  EXPECT_EQ(points->size(), outcome.point_count);
  const double counter = bench.burette().counter_ml();
  std::this_thread::sleep_for(std::chrono::milliseconds(50));  // 20 s of clock time
  EXPECT_DOUBLE_EQ(bench.burette().counter_ml(), counter);
}

TEST_F(Worker, DestroyingARunningWorkerAbortsAndJoins) {
  std::int64_t run_id = 0;
  {
    TitrationMethod method;
    RunWorker worker(instruments, *store, sample, method);
    worker.start();
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  auto runs = store->list_runs();
  ASSERT_TRUE(runs.has_value());
  ASSERT_EQ(runs->size(), 1u);
  run_id = runs->front().id;
  EXPECT_EQ(runs->front().status, store::RunStatus::aborted);
  EXPECT_GT(run_id, 0);
  EXPECT_FALSE(bench.burette().moving());
}

}  // namespace
}  // namespace veq::controller
