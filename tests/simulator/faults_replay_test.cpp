// Faults switched on in the scenario or at run time, at several moments of a
// run, seen through the drivers' clients: what each client reports and that
// no reading taken before the fault is lost. Then replayed curves: a stored
// curve reproduced at its own volumes and interpolated between them.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <memory>
#include <vector>

#include "drivers/balance_client.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/device_link.hpp"
#include "drivers/photometer_client.hpp"
#include "drivers/sensor_client.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace veq::simulator {
namespace {

using namespace std::chrono_literals;

Scenario faults_replay_demo() {
  auto s = parse_scenario(builtin_scenario("demo_calcium"), "demo");
  EXPECT_TRUE(s.has_value());
  s->electrode.noise_mv = 0.0;
  s->electrode.response_time_s = 0.0;
  return *s;
}

struct FaultsReplayHost {
  drivers::VirtualClock clock;
  std::unique_ptr<SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link, balance_link, photometer_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<drivers::BalanceClient> balance;
  std::unique_ptr<drivers::PhotometerClient> photometer;

  explicit FaultsReplayHost(const Scenario& s) {
    bench = std::make_unique<SimulatedBench>(s, clock);
    burette_link = std::make_unique<drivers::DeviceLink>(bench->burette_line(), clock, "burette");
    sensor_link = std::make_unique<drivers::DeviceLink>(bench->electrode_line(), clock, "sensor");
    balance_link = std::make_unique<drivers::DeviceLink>(bench->balance_line(), clock, "balance");
    photometer_link =
        std::make_unique<drivers::DeviceLink>(bench->photometer_line(), clock, "photometer");
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
    balance = std::make_unique<drivers::BalanceClient>(*balance_link);
    photometer = std::make_unique<drivers::PhotometerClient>(*photometer_link);
  }

  /// A short titration: up to `points` doses of 0.5 mL, a reading after
  /// each. Stops at the first failure, returning what was read before it.
  std::vector<double> titrate(int points, Error* failure,
                              std::vector<double>* read_at_s = nullptr) {
    std::vector<double> readings;
    for (int i = 0; i < points; ++i) {
      auto dosed = burette->dose(0.5, 20.0);
      if (!dosed) {
        *failure = dosed.error();
        return readings;
      }
      if (read_at_s)
        read_at_s->push_back(clock.now_s());
      auto r = sensor->read();
      if (!r) {
        *failure = r.error();
        return readings;
      }
      readings.push_back(r->potential_mv);
    }
    return readings;
  }
};

FaultPlan plan(FaultKind kind, double after_s) {
  FaultPlan p;
  p.kind = kind;
  p.after_s = after_s;
  return p;
}

// One 0.5 mL dose at 20 mL/min takes 1.5 s of device time (and the status
// polls round it up); ten points take about 16 s. Faults begin after 0 (at
// once), 4.7 and 10.7 s of device time.
const double kMoments[] = {0.0, 4.7, 10.7};

/// Readings before the fault match a run without it, one for one.
void expect_same_prefix(const std::vector<double>& got, const std::vector<double>& clean) {
  ASSERT_LE(got.size(), clean.size());
  for (std::size_t i = 0; i < got.size(); ++i)
    EXPECT_NEAR(got[i], clean[i], 1e-9) << "reading " << i;
}

/// Readings of a run without faults, and when each was asked for.
std::vector<double> clean_run(std::vector<double>* read_at_s) {
  FaultsReplayHost h(faults_replay_demo());
  Error none;
  return h.titrate(10, &none, read_at_s);
}

std::size_t asked_before(const std::vector<double>& read_at_s, double at) {
  std::size_t n = 0;
  while (n < read_at_s.size() && read_at_s[n] < at)
    ++n;
  return n;
}

TEST(Faults, ElectrodeLineFaultsAtSeveralMoments) {
  std::vector<double> times;
  const auto clean = clean_run(&times);
  ASSERT_EQ(clean.size(), 10u);
  const std::pair<FaultKind, ErrorKind> cases[] = {
      {FaultKind::silence, ErrorKind::timeout},
      {FaultKind::garbage, ErrorKind::garbled},
      {FaultKind::partial_line, ErrorKind::timeout},
      {FaultKind::slow_replies, ErrorKind::timeout},
      {FaultKind::disconnect, ErrorKind::disconnected},
      {FaultKind::out_of_range, ErrorKind::device_refused},
  };
  for (const auto& [kind, expected] : cases) {
    for (double at : kMoments) {
      Scenario s = faults_replay_demo();
      s.electrode_fault = plan(kind, at);
      FaultsReplayHost h(s);
      Error failure;
      const auto got = h.titrate(10, &failure);
      SCOPED_TRACE(std::string(fault_kind_name(kind)) + " after " + std::to_string(at) + " s");
      // Every point before the fault is there and right; the fault stops the
      // run with the reason the client gives.
      EXPECT_EQ(got.size(), asked_before(times, at));
      expect_same_prefix(got, clean);
      EXPECT_EQ(failure.kind, expected) << failure.message;
    }
  }
}

TEST(Faults, SlowRepliesWithinTheTimeoutOnlyCostTime) {
  Scenario s = faults_replay_demo();
  FaultPlan slow = plan(FaultKind::slow_replies, 0.0);
  slow.delay_ms = 300.0;  // under the link's 2 s reply timeout
  s.electrode_fault = slow;
  FaultsReplayHost h(s);
  const auto before = h.clock.now_s();
  auto r = h.sensor->read();
  ASSERT_TRUE(r.has_value()) << r.error().message;
  EXPECT_NEAR(h.clock.now_s() - before, 0.3, 1e-6);
}

TEST(Faults, SwitchedAtRunTimeAndOffAgain) {
  FaultsReplayHost h(faults_replay_demo());
  ASSERT_TRUE(h.sensor->read().has_value());
  ASSERT_TRUE(h.bench->set_fault("electrode", plan(FaultKind::silence, h.clock.now_s())));
  auto silent = h.sensor->read();
  ASSERT_FALSE(silent.has_value());
  EXPECT_EQ(silent.error().kind, ErrorKind::timeout);
  ASSERT_TRUE(h.bench->set_fault("electrode", FaultPlan{}));
  EXPECT_TRUE(h.sensor->read().has_value());
  // A fault with an end: spikes only between 10 and 20 s of device time.
  FaultPlan spikes = plan(FaultKind::spikes, 10.0);
  spikes.until_s = 20.0;
  spikes.probability = 1.0;
  spikes.size = 25.0;
  ASSERT_TRUE(h.bench->set_fault("electrode", spikes));
  EXPECT_FALSE(h.bench->set_fault("thermometer", spikes));
  const double steady = h.bench->electrode().equilibrium_potential_mv(0.0);
  h.clock.sleep_for(drivers::from_seconds(12.0 - h.clock.now_s()));
  auto spiked = h.sensor->read();
  ASSERT_TRUE(spiked.has_value());
  EXPECT_NEAR(std::fabs(spiked->potential_mv - steady), 25.0, 1e-3);
  h.clock.sleep_for(10s);
  auto after = h.sensor->read();
  ASSERT_TRUE(after.has_value());
  EXPECT_NEAR(after->potential_mv, steady, 1e-3);
}

TEST(Faults, DeadElectrodeFreezesAndSpikesComeNowAndThen) {
  std::vector<double> times;
  const auto clean = clean_run(&times);
  for (double at : kMoments) {
    Scenario s = faults_replay_demo();
    s.electrode_fault = plan(FaultKind::dead, at);
    FaultsReplayHost h(s);
    Error failure;
    const auto got = h.titrate(10, &failure);
    ASSERT_EQ(got.size(), 10u) << failure.message;
    // From the fault on every reading repeats the one it froze at.
    const std::size_t first_dead = asked_before(times, at);
    for (std::size_t i = 0; i < got.size(); ++i) {
      // Live before the fault, then frozen at the first reading under it.
      EXPECT_NEAR(got[i], clean[std::min(i, first_dead)], 1e-9) << "reading " << i;
    }
  }
  Scenario s = faults_replay_demo();
  FaultPlan spikes = plan(FaultKind::spikes, 0.0);
  spikes.probability = 0.3;
  s.electrode_fault = spikes;
  FaultsReplayHost h(s);
  int hit = 0;
  for (int i = 0; i < 200; ++i) {
    auto r = h.sensor->read();
    ASSERT_TRUE(r.has_value());
    const double off =
        std::fabs(r->potential_mv - h.bench->electrode().equilibrium_potential_mv(0.0));
    EXPECT_TRUE(off < 1e-3 || std::fabs(off - 50.0) < 1e-3) << off;
    hit += off > 1.0 ? 1 : 0;
  }
  // Binomial(200, 0.3): mean 60, standard deviation 6.5; +-5 sigma.
  EXPECT_GT(hit, 27);
  EXPECT_LT(hit, 93);
}

TEST(Faults, BuretteStallAndEmptyAtSeveralMoments) {
  for (MotorFaultKind kind : {MotorFaultKind::stalled, MotorFaultKind::empty}) {
    for (double at : {0.5, 5.2, 11.0}) {
      Scenario s = faults_replay_demo();
      s.burette.motor_fault = MotorFault{kind, at};
      FaultsReplayHost h(s);
      Error failure;
      const auto got = h.titrate(10, &failure);
      SCOPED_TRACE(std::string(motor_fault_kind_name(kind)) + " at " + std::to_string(at));
      EXPECT_EQ(failure.kind, ErrorKind::device_fault) << failure.message;
      EXPECT_NE(failure.message.find(motor_fault_kind_name(kind)), std::string::npos)
          << failure.message;
      // Every dose that ended before the fault kept its reading; the burette
      // stopped part of the way through the next one.
      const double delivered = h.bench->burette().true_delivered_ml();
      EXPECT_GE(delivered, 0.5 * static_cast<double>(got.size()) - 1e-9);
      EXPECT_LT(delivered, 0.5 * static_cast<double>(got.size() + 1));
      EXPECT_GE(got.size(), at > 5.0 ? 3u : 0u);
    }
  }
  // At run time, from now.
  FaultsReplayHost h(faults_replay_demo());
  ASSERT_TRUE(h.burette->dose(0.5, 20.0).has_value());
  h.bench->burette().set_motor_fault(MotorFault{MotorFaultKind::stalled, h.clock.now_s()});
  auto stalled = h.burette->dose(0.5, 20.0);
  ASSERT_FALSE(stalled.has_value());
  EXPECT_NEAR(h.bench->burette().true_delivered_ml(), 0.5, 1e-9);
}

TEST(Faults, PhotometerSensorFaultsAtRunTime) {
  Scenario s = faults_replay_demo();
  s.photometer.noise_absorbance = 0.0;
  FaultsReplayHost h(s);
  ASSERT_TRUE(h.photometer->zero().has_value());
  ASSERT_TRUE(h.burette->dose(2.0, 20.0).has_value());
  auto live = h.photometer->read();
  ASSERT_TRUE(live.has_value());
  EXPECT_GT(live->absorbance, 0.01);  // the Cu-EDTA-like band grows with the complex
  // Dead from now: further titrant changes nothing on the display.
  ASSERT_TRUE(h.bench->set_fault("photometer", plan(FaultKind::dead, h.clock.now_s())));
  auto frozen_first = h.photometer->read();
  ASSERT_TRUE(h.burette->dose(2.0, 20.0).has_value());
  auto frozen = h.photometer->read();
  ASSERT_TRUE(frozen_first && frozen);
  EXPECT_EQ(frozen->absorbance, frozen_first->absorbance);
  // Out of range on top: refused with the device's reason.
  ASSERT_TRUE(h.bench->add_fault("photometer", plan(FaultKind::out_of_range, h.clock.now_s())));
  auto refused = h.photometer->read();
  ASSERT_FALSE(refused.has_value());
  EXPECT_EQ(refused.error().kind, ErrorKind::device_refused);
  EXPECT_NE(refused.error().message.find("range"), std::string::npos) << refused.error().message;
  // All off: live again, at the 4 mL now in the vessel.
  h.bench->device("photometer")->clear_faults();
  auto again = h.photometer->read();
  ASSERT_TRUE(again.has_value());
  EXPECT_GT(again->absorbance, frozen->absorbance + 0.005);
}

TEST(Faults, BalanceNeverStable) {
  Scenario s = faults_replay_demo();
  s.balance.settle_time_s = 0.0;
  s.balance_fault = plan(FaultKind::never_stable, 0.0);
  FaultsReplayHost h(s);
  auto r = h.balance->read();
  ASSERT_TRUE(r.has_value());
  EXPECT_FALSE(r->stable);
  auto waited = h.balance->read_stable();
  ASSERT_FALSE(waited.has_value());
  EXPECT_EQ(waited.error().kind, ErrorKind::timeout);
  EXPECT_FALSE(h.balance->tare().has_value());
}

TEST(Faults, ScenarioNamesEveryFault) {
  bool ok = false;
  for (FaultKind k : {FaultKind::silence, FaultKind::garbage, FaultKind::partial_line,
                      FaultKind::slow_replies, FaultKind::disconnect, FaultKind::dead,
                      FaultKind::spikes, FaultKind::out_of_range, FaultKind::never_stable}) {
    EXPECT_EQ(fault_kind_from_name(fault_kind_name(k), &ok), k);
    EXPECT_TRUE(ok);
  }
  auto s = parse_scenario(R"({"sample": {"metal_conc_mol_per_l": 0.01, "volume_ml": 25,
      "log10_formation_constant": 10.7}, "titrant": {"label_conc_mol_per_l": 0.05, "pka": [2, 6, 10]},
      "electrode": {"fault": {"kind": "spikes", "after_s": 3, "until_s": 9, "probability": 0.5, "size": 7}}})",
                          "t");
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_EQ(s->electrode_fault.kind, FaultKind::spikes);
  EXPECT_EQ(s->electrode_fault.until_s, 9.0);
  EXPECT_EQ(s->electrode_fault.size, 7.0);
  auto bad = parse_scenario(R"({"sample": {"metal_conc_mol_per_l": 0.01, "volume_ml": 25,
      "log10_formation_constant": 10.7}, "titrant": {"label_conc_mol_per_l": 0.05, "pka": [2]},
      "electrode": {"fault": {"kind": "smoke"}}})",
                            "t");
  ASSERT_FALSE(bad.has_value());
  EXPECT_NE(bad.error().message.find("electrode.fault.kind"), std::string::npos);
}

// ---- replay ----

TEST(Replay, ReproducesTheStoredCurveAndInterpolates) {
  // A stored curve (invented numbers) at its own volumes.
  auto curve = parse_replay_csv(
      "volume_ml,potential_mv\n0,100.0\n0.5,101.5\n1.0,104.0\n1.5,130.0\n2.0,160.25\n", "run.csv");
  ASSERT_TRUE(curve.has_value()) << curve.error().message;
  Scenario s = faults_replay_demo();
  s.replay = *curve;
  FaultsReplayHost h(s);
  auto r0 = h.sensor->read();
  ASSERT_TRUE(r0.has_value());
  EXPECT_EQ(r0->potential_mv, 100.0);
  std::vector<double> got;
  for (int i = 0; i < 4; ++i) {
    ASSERT_TRUE(h.burette->dose(0.5, 20.0).has_value());
    got.push_back(h.sensor->read()->potential_mv);
  }
  EXPECT_EQ(got, (std::vector<double>{101.5, 104.0, 130.0, 160.25}));
  // Linear between points: 1.25 mL lies halfway between 104.0 and 130.0.
  EXPECT_NEAR(replay_signal(*curve, 1.25, nullptr), 117.0, 1e-12);
  EXPECT_NEAR(replay_signal(*curve, 0.1, nullptr), 100.3, 1e-12);
  // Beyond the stored curve: clamped by default.
  ASSERT_TRUE(h.burette->dose(0.5, 20.0).has_value());
  EXPECT_EQ(h.sensor->read()->potential_mv, 160.25);
}

TEST(Replay, OutsideTheCurveCanBeAFault) {
  auto curve = replay_from_columns({0.0, 1.0}, {0.10, 0.60});
  ASSERT_TRUE(curve.has_value());
  curve->role = "photometer";
  curve->outside = ReplayOutside::fault;
  Scenario s = faults_replay_demo();
  s.replay = *curve;
  FaultsReplayHost h(s);
  ASSERT_TRUE(h.burette->dose(0.5, 20.0).has_value());
  auto inside = h.photometer->read();
  ASSERT_TRUE(inside.has_value());
  // Linear between (0, 0.10) and (1, 0.60) at the volume truly delivered
  // (the burette's whole steps); five decimals in the reply.
  EXPECT_NEAR(inside->absorbance, 0.10 + 0.5 * h.bench->burette().true_delivered_ml(), 6e-6);
  ASSERT_TRUE(h.burette->dose(0.7, 20.0).has_value());
  auto outside = h.photometer->read();
  ASSERT_FALSE(outside.has_value());
  EXPECT_EQ(outside.error().kind, ErrorKind::device_refused);
}

TEST(Replay, BadCurvesNameTheRow) {
  auto text = parse_replay_csv("volume_ml,mv\n0,1\n0.5,x\n", "a.csv");
  ASSERT_FALSE(text.has_value());
  EXPECT_NE(text.error().message.find("a.csv: line 3"), std::string::npos) << text.error().message;
  auto backwards = replay_from_columns({0.0, 1.0, 0.9}, {1, 2, 3});
  ASSERT_FALSE(backwards.has_value());
  EXPECT_NE(backwards.error().message.find("row 3"), std::string::npos);
  auto nan = replay_from_columns({0.0, std::nan("")}, {1, 2});
  ASSERT_FALSE(nan.has_value());
  auto scenario = parse_scenario(R"({"sample": {"metal_conc_mol_per_l": 0.01, "volume_ml": 25,
      "log10_formation_constant": 10.7}, "titrant": {"label_conc_mol_per_l": 0.05, "pka": [2]},
      "replay": {"volume_ml": [0, 1, 2], "signal": [5, 6, 7], "outside": "fault"}})",
                                 "t");
  ASSERT_TRUE(scenario.has_value()) << scenario.error().message;
  EXPECT_EQ(scenario->replay.signal.size(), 3u);
  EXPECT_EQ(scenario->replay.outside, ReplayOutside::fault);
}

}  // namespace
}  // namespace veq::simulator
