// Whole titrations in virtual time: the fixed-increment procedure against the
// simulated burette and electrode, through the real protocol and store.
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <random>
#include <string>
#include <vector>

#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "tests/controller/simulated_trial.hpp"

namespace veq::controller {
namespace {

using testing::demo_scenario;
using testing::Trial;

/// Seeds of the repeated titration below: 50 (the requirement), 10 in the
/// sanitizer builds, where the same procedure 50 times at -O0 took 79 s and
/// checked memory, not statistics, 40 times more.
#ifdef VEQ_SANITIZED
constexpr int kTitrationSeeds = 10;
#else
constexpr int kTitrationSeeds = 50;
#endif

TEST(FixedIncrementTitration, FindsTheEquivalenceWithinTwoTenthsOfAPercentOver50Seeds) {
  // Issue requirement: 0.1 mV noise, 0.05 mL steps, 50 seeds, |error| < 0.2 %.
  // The sample content varies per seed so the equivalence point falls at any
  // position between two volume steps.
  std::mt19937_64 draw(4242);
  std::uniform_real_distribution<double> content(0.017, 0.023);
  double worst = 0.0, sum = 0.0;
  for (int seed = 1; seed <= kTitrationSeeds; ++seed) {
    auto scenario = demo_scenario();
    scenario.seed = static_cast<std::uint64_t>(seed);
    scenario.sample.metal_conc_mol_per_l = content(draw);
    scenario.electrode.noise_mv = 0.1;
    Trial trial(scenario);
    trial.method.dosing.increment_ml = 0.05;
    const auto outcome = trial.run();
    ASSERT_EQ(outcome.status, store::RunStatus::completed)
        << "seed " << seed << ": " << outcome.reason;
    ASSERT_TRUE(outcome.endpoint.has_value());
    const double truth = trial.bench->true_equivalence_reading_ml();
    const double error = (outcome.endpoint->volume_ml - truth) / truth;
    EXPECT_LT(std::abs(error), 0.002) << "seed " << seed << ": endpoint "
                                      << outcome.endpoint->volume_ml << " mL, truth " << truth;
    worst = std::max(worst, std::abs(error));
    sum += error;
  }
  RecordProperty("worst_relative_error", std::to_string(worst));
  RecordProperty("mean_relative_error", std::to_string(sum / kTitrationSeeds));
}

TEST(FixedIncrementTitration, StoresEveryPointAndTheResult) {
  Trial trial(demo_scenario());
  const auto outcome = trial.run();
  ASSERT_EQ(outcome.status, store::RunStatus::completed) << outcome.reason;
  auto points = trial.store->load_points(outcome.run_id);
  ASSERT_TRUE(points.has_value());
  EXPECT_EQ(points->size(), outcome.point_count);
  // Volumes rise by the increment and never exceed the limit.
  for (std::size_t i = 1; i < points->size(); ++i) {
    EXPECT_NEAR((*points)[i].volume_ml - (*points)[i - 1].volume_ml, 0.05, 1e-9);
  }
  // Stopped about 1 mL past the endpoint (10.000 mL for the demo sample).
  EXPECT_NEAR(points->back().volume_ml, 11.0, 0.1);
  // Every accepted reading obeyed the drift rule or waited the longest time.
  for (const auto& p : *points) {
    EXPECT_TRUE(std::abs(p.drift_per_min) <= 1.0 || p.settle_s >= 60.0) << p.index;
  }
  auto results = trial.store->load_results(outcome.run_id);
  ASSERT_TRUE(results.has_value());
  ASSERT_EQ(results->size(), 4u);
  // 25 mL of 0.0200 mol/L calcium: 20 mmol/L (scenario truth), within 0.2 %.
  EXPECT_EQ((*results)[2].name, "metal_concentration");
  EXPECT_NEAR((*results)[2].value, 20.0, 0.04);
  auto run = trial.store->load_run(outcome.run_id);
  EXPECT_EQ(run->status, store::RunStatus::completed);
}

void expect_safe_failure(Trial& trial, const RunOutcome& outcome, ErrorKind kind,
                         const char* says) {
  EXPECT_EQ(outcome.status, store::RunStatus::failed);
  EXPECT_NE(outcome.reason.find(error_kind_name(kind)), std::string::npos) << outcome.reason;
  EXPECT_NE(outcome.reason.find(says), std::string::npos) << outcome.reason;
  // Every point measured before the fault is in the store.
  auto points = trial.store->load_points(outcome.run_id);
  ASSERT_TRUE(points.has_value());
  EXPECT_GT(points->size(), 5u);
  EXPECT_EQ(points->size(), outcome.point_count);
  auto run = trial.store->load_run(outcome.run_id);
  EXPECT_EQ(run->status, store::RunStatus::failed);
  EXPECT_EQ(run->end_reason, outcome.reason);
  // The burette is not moving now, nor a minute later.
  EXPECT_FALSE(trial.bench->burette().moving());
  const double counter = trial.bench->burette().counter_ml();
  trial.clock.sleep_for(std::chrono::seconds(60));
  EXPECT_DOUBLE_EQ(trial.bench->burette().counter_ml(), counter);
}

TEST(FixedIncrementTitration, GarbledElectrodeReplyEndsTheRunSafely) {
  auto scenario = demo_scenario();
  scenario.electrode_fault = {simulator::FaultKind::garbage, 300.0};
  Trial trial(scenario);
  const auto outcome = trial.run();
  expect_safe_failure(trial, outcome, ErrorKind::garbled, "electrode");
}

TEST(FixedIncrementTitration, SilentElectrodeEndsTheRunSafely) {
  auto scenario = demo_scenario();
  scenario.electrode_fault = {simulator::FaultKind::silence, 400.0};
  Trial trial(scenario);
  const auto outcome = trial.run();
  expect_safe_failure(trial, outcome, ErrorKind::timeout, "electrode");
}

TEST(FixedIncrementTitration, PartialLineFromTheElectrodeEndsTheRunSafely) {
  auto scenario = demo_scenario();
  scenario.electrode_fault = {simulator::FaultKind::partial_line, 350.0};
  Trial trial(scenario);
  const auto outcome = trial.run();
  expect_safe_failure(trial, outcome, ErrorKind::timeout, "unfinished line");
}

TEST(FixedIncrementTitration, SilentBuretteStopsByItself) {
  // The burette falls silent: the host cannot confirm a stop, so the device's
  // own host-silence limit and the dose's time limit must end any motion.
  auto scenario = demo_scenario();
  scenario.burette_fault = {simulator::FaultKind::silence, 500.0};
  Trial trial(scenario);
  const auto outcome = trial.run();
  EXPECT_FALSE(outcome.burette_stopped);
  expect_safe_failure(trial, outcome, ErrorKind::timeout, "burette");
}

TEST(FixedIncrementTitration, GarbledBuretteReplyEndsTheRunSafely) {
  auto scenario = demo_scenario();
  scenario.burette_fault = {simulator::FaultKind::garbage, 250.0};
  Trial trial(scenario);
  const auto outcome = trial.run();
  expect_safe_failure(trial, outcome, ErrorKind::garbled, "burette");
}

TEST(FixedIncrementTitration, AbortStopsAndRecords) {
  Trial trial(demo_scenario());
  RunControl control;
  control.abort = true;
  const auto outcome = trial.run(&control);
  EXPECT_EQ(outcome.status, store::RunStatus::aborted);
  EXPECT_NE(outcome.reason.find("aborted by the operator"), std::string::npos);
  EXPECT_FALSE(trial.bench->burette().moving());
}

TEST(FixedIncrementTitration, NoBreakBeforeTheMaximumVolumeIsAFailureWithReason) {
  Trial trial(demo_scenario());
  trial.method.max_volume_ml = 5.0;  // the demo's equivalence is at 10 mL
  const auto outcome = trial.run();
  EXPECT_EQ(outcome.status, store::RunStatus::failed);
  EXPECT_NE(outcome.reason.find("no endpoint"), std::string::npos) << outcome.reason;
  EXPECT_NE(outcome.reason.find("maximum volume"), std::string::npos) << outcome.reason;
  EXPECT_LE(trial.bench->burette().counter_ml(), 5.0 + 1e-9);
}

// Electrode spikes (one reading in five off by 50 mV, the simulator's
// spikes fault, as in the fault campaign of docs/reliability.md) from the
// start of the flat branch: a spike taken as a point's signal looks like the
// break, and the run used to stop 1 mL past it with an endpoint 60 % short.
// Now every run either completes with the endpoint within the 0.2 % of the
// fault-free requirement above (the requirement) or fails with a
// reason; no stored point on the flat branch is a spike; the messages say
// that readings were rejected.
TEST(FixedIncrementTitration, ElectrodeSpikesOnTheFlatBranchAreNeverTakenForThePoint) {
  struct Messages : RunObserver {
    std::vector<std::string> said;
    void on_message(const std::string& text) override { said.push_back(text); }
  };
  int completed = 0;
  for (int seed = 1; seed <= 4; ++seed) {
    SCOPED_TRACE("seed " + std::to_string(seed));
    auto scenario = demo_scenario();
    scenario.seed = static_cast<std::uint64_t>(seed);
    simulator::FaultPlan plan;
    plan.kind = simulator::FaultKind::spikes;
    plan.after_s = 30.0 * seed;  // early on the flat branch, a little later each seed
    scenario.electrode_fault = plan;
    Trial trial(scenario);
    Messages messages;
    const auto outcome = trial.run(nullptr, &messages);
    const double truth = trial.bench->true_equivalence_reading_ml();
    if (outcome.status != store::RunStatus::completed) {
      EXPECT_FALSE(outcome.reason.empty());
      continue;
    }
    ++completed;
    ASSERT_TRUE(outcome.endpoint.has_value());
    EXPECT_LT(std::abs(outcome.endpoint->volume_ml - truth) / truth, 0.002)
        << "endpoint " << outcome.endpoint->volume_ml << " mL, truth " << truth << " mL";
    // On the flat branch (below 90 % of the equivalence volume) successive
    // points move by a few mV at most; a 50 mV spike would stand out.
    auto points = trial.store->load_points(outcome.run_id).value();
    for (std::size_t i = 1; i + 1 < points.size(); ++i) {
      if (points[i + 1].volume_ml > 0.9 * truth)
        break;
      const double between = 0.5 * (points[i - 1].signal + points[i + 1].signal);
      EXPECT_LT(std::abs(points[i].signal - between), 10.0)
          << "point " << i << " at " << points[i].volume_ml << " mL";
    }
    bool rejected = false;
    for (const auto& m : messages.said)
      rejected = rejected || m.find("rejected as") != std::string::npos;
    EXPECT_TRUE(rejected);
  }
  // The spikes must not make every run fail either.
  EXPECT_GE(completed, 3);
}

TEST(MetalResult, AmountAndConcentrationFromTheEndpoint) {
  // Worked by hand: 12.50 mL of 0.01000 mol/L EDTA for a 50.00 mL aliquot is
  // 0.1250 mmol of metal, 2.500 mmol/L; with Ca (standard atomic weight
  // 40.078, IUPAC 2021 table) 100.2 mg/L.
  SampleDescription s;
  s.sample_volume_ml = 50.0;
  s.titrant_conc_mol_per_l = 0.01;
  auto r = compute_metal_result(12.5, s);
  ASSERT_TRUE(r.has_value());
  EXPECT_NEAR(r->amount_mmol, 0.125, 1e-12);
  EXPECT_NEAR(r->conc_mmol_per_l, 2.5, 1e-12);
  EXPECT_NEAR(r->conc_mg_per_l, 100.195, 1e-9);
  s.sample_volume_ml = 0.0;
  EXPECT_FALSE(compute_metal_result(12.5, s).has_value());
}

TEST(Drift, LeastSquaresSlopePerMinute) {
  // A straight line rising 0.5 mV per second is 30 mV/min whatever the offset.
  std::vector<double> t = {0, 1, 2, 3, 4, 5};
  std::vector<double> v;
  for (double x : t)
    v.push_back(-120.0 + 0.5 * x);
  EXPECT_NEAR(least_squares_slope_per_min(t, v), 30.0, 1e-9);
  EXPECT_DOUBLE_EQ(least_squares_slope_per_min({1.0}, {2.0}), 0.0);
}

}  // namespace
}  // namespace veq::controller
