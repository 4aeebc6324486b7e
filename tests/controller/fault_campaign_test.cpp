// Fault campaign: every fault of the simulated burette and electrode,
// switched on at four moments of a titration: while the burette refills its
// cylinder, while it doses, while the run waits for a stable reading, and
// once the run evaluates. Whole runs in virtual time through the real
// protocol and store. For each: the expected end and reason, no point lost,
// the burette not moving. The table of outcomes is written to
// <build>/tests/fault-campaign.md, and to docs/reliability.md when the
// environment variable VEQ_UPDATE_DOCS is set.
#include <gtest/gtest.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <functional>
#include <memory>
#include <optional>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "tests/controller/simulated_trial.hpp"

namespace veq::controller {
namespace {

struct Fault {
  const char* name;
  const char* device;  // "burette" or "electrode"
  std::optional<simulator::FaultKind> line;
  std::optional<simulator::MotorFaultKind> motor;
  /// The run must fail with this kind of error once the fault strikes
  /// (nullopt: a sensor that still answers; the run may complete).
  std::optional<ErrorKind> expected;
};

// Every fault the simulator has for these two devices: the five line faults
// of any device, the electrode's three faults of its reading, the burette's
// three motor faults. (The balance's wandering reading is the one fault
// left: a titration does not weigh; tests/controller/series_test.cpp has it.)
const std::vector<Fault>& faults() {
  using simulator::FaultKind;
  using simulator::MotorFaultKind;
  static const std::vector<Fault> all{
      {"electrode silent", "electrode", FaultKind::silence, {}, ErrorKind::timeout},
      {"electrode garbage bytes", "electrode", FaultKind::garbage, {}, ErrorKind::garbled},
      {"electrode partial lines", "electrode", FaultKind::partial_line, {}, ErrorKind::timeout},
      {"electrode slow replies", "electrode", FaultKind::slow_replies, {}, ErrorKind::timeout},
      {"electrode disconnected", "electrode", FaultKind::disconnect, {}, ErrorKind::disconnected},
      {"electrode out of range",
       "electrode",
       FaultKind::out_of_range,
       {},
       ErrorKind::device_refused},
      {"electrode dead", "electrode", FaultKind::dead, {}, {}},
      {"electrode spikes", "electrode", FaultKind::spikes, {}, {}},
      {"burette silent", "burette", FaultKind::silence, {}, ErrorKind::timeout},
      {"burette garbage bytes", "burette", FaultKind::garbage, {}, ErrorKind::garbled},
      {"burette partial lines", "burette", FaultKind::partial_line, {}, ErrorKind::timeout},
      {"burette slow replies", "burette", FaultKind::slow_replies, {}, ErrorKind::timeout},
      {"burette disconnected", "burette", FaultKind::disconnect, {}, ErrorKind::disconnected},
      {"burette stalled", "burette", {}, MotorFaultKind::stalled, ErrorKind::device_fault},
      {"burette overloaded", "burette", {}, MotorFaultKind::overload, ErrorKind::device_fault},
      {"burette reservoir empty", "burette", {}, MotorFaultKind::empty, ErrorKind::device_fault},
  };
  return all;
}

enum class Moment { filling, dosing, waiting, evaluating };
constexpr Moment kMoments[] = {Moment::filling, Moment::dosing, Moment::waiting,
                               Moment::evaluating};

std::string moment_name(Moment m) {
  switch (m) {
    case Moment::filling:
      return "filling the cylinder (at half the equivalence volume)";
    case Moment::dosing:
      return "dosing (at 85 % of the equivalence volume)";
    case Moment::waiting:
      return "waiting for a stable reading (after that dose)";
    case Moment::evaluating:
      return "evaluating";
  }
  return "?";
}

// Virtual time that calls `watch` after every step, so that the campaign can
// see what the simulated burette does at each moment the host waits.
class WatchedClock final : public drivers::Clock {
 public:
  drivers::Duration now() const override { return now_; }
  void sleep_for(drivers::Duration d) override {
    if (d > drivers::Duration::zero())
      now_ += d;
    if (watch)
      watch();
  }
  std::function<void()> watch;

 private:
  drivers::Duration now_{0};
};

// The demo sample with a 5 mL cylinder, so that the burette refills it twice
// during the titration (near 5 and 10 mL): a fill is a moment of its own.
simulator::Scenario campaign_scenario() {
  auto s = testing::demo_scenario();
  s.burette.cylinder_ml = 5.0;
  s.burette.max_dose_ml = 5.0;
  return s;
}

struct StateLog final : RunObserver {
  const drivers::Clock* clock = nullptr;
  std::vector<std::pair<double, RunState>> entered;  // (time s, state)
  RunState failed_in = RunState::starting;
  void on_state(RunState from, RunState to, const std::string&) override {
    entered.emplace_back(clock->now_s(), to);
    if (to == RunState::failed)
      failed_in = from;
  }
};

// One titration of the campaign sample with fixed increments up to 20 mL, run
// at once; the truth is the simulator's, read before the run.
struct CampaignRun {
  WatchedClock clock;
  std::unique_ptr<simulator::SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<store::SqliteStore> store;
  SampleDescription sample;
  TitrationMethod method;
  StateLog states;
  RunOutcome outcome;
  double truth_ml = 0.0;
  // The burette's motions as the host saw them: (first, last) time it was
  // seen moving, s.
  std::vector<std::pair<double, double>> fills, doses;

  explicit CampaignRun(const simulator::Scenario& scenario) {
    testing::connect_simulated_bench(*this, scenario, clock);
    store = std::move(store::SqliteStore::open(":memory:")).value();
    sample.sample_id = "campaign";
    sample.sample_volume_ml = scenario.sample.volume_ml;
    sample.titrant_conc_mol_per_l = scenario.titrant.label_conc_mol_per_l;
    method.max_volume_ml = 20.0;
    truth_ml = bench->true_equivalence_reading_ml();
    states.clock = &clock;
    enum { idle, filling, dosing } was = idle;
    clock.watch = [this, &was] {
      const auto& b = bench->burette();
      const auto now = clock.now_s();
      const auto is = !b.moving() ? idle : b.filling() ? filling : dosing;
      if (is != idle) {
        auto& list = is == filling ? fills : doses;
        if (is != was)
          list.emplace_back(now, now);
        list.back().second = now;
      }
      was = is;
    };
    Instruments instruments{*burette, *sensor, clock};
    outcome = run_titration(instruments, *store, sample, method, &states, nullptr);
    clock.watch = nullptr;
  }

  double entered_s(RunState state) const {
    for (const auto& [t, s] : states.entered) {
      if (s == state)
        return t;
    }
    return -1.0;
  }
};

// The moments of the fault-free run, s of virtual time (device time and the
// run clock start together here).
struct Moments {
  double at_s[4] = {-1.0, -1.0, -1.0, -1.0};
  double fill_start_ml = 0.0;  // burette reading when that fill began
  double dose_from_ml = 0.0;   // the dose's start and end reading
  double dose_to_ml = 0.0;
};

Moments find_moments(const CampaignRun& clean) {
  Moments m;
  const auto points = clean.store->load_points(clean.outcome.run_id).value();
  // Filling: the middle of the first refill during the titration.
  const double titrating_s = clean.entered_s(RunState::titrating);
  for (const auto& [first, last] : clean.fills) {
    if (first > titrating_s) {
      m.at_s[0] = 0.5 * (first + last);
      for (const auto& p : points) {
        if (p.time_s <= first)
          m.fill_start_ml = p.volume_ml;
      }
      break;
    }
  }
  // Dosing and waiting: the dose that passes 85 % of the equivalence volume,
  // and the wait for a stable reading after it.
  for (std::size_t k = 1; k < points.size(); ++k) {
    if (points[k].volume_ml < 0.85 * clean.truth_ml)
      continue;
    for (const auto& [first, last] : clean.doses) {
      if (first > points[k - 1].time_s && last < points[k].time_s) {
        m.at_s[1] = 0.5 * (first + last);
        m.at_s[2] = 0.5 * (last + points[k].time_s);
        m.dose_from_ml = points[k - 1].volume_ml;
        m.dose_to_ml = points[k].volume_ml;
      }
    }
    break;
  }
  // Evaluating: the run has its last point and talks to no device. (Its last
  // reading and the change of state fall on the same instant of virtual
  // time; a millisecond later the reading is in.)
  m.at_s[3] = clean.entered_s(RunState::evaluating) + 0.001;
  return m;
}

simulator::Scenario with_fault(const Fault& f, double at_s) {
  auto scenario = campaign_scenario();
  if (f.line) {
    simulator::FaultPlan plan;
    plan.kind = *f.line;
    plan.after_s = at_s;
    (std::string(f.device) == "burette" ? scenario.burette_fault : scenario.electrode_fault) = plan;
  } else {
    scenario.burette.motor_fault = {*f.motor, at_s};
  }
  return scenario;
}

TEST(FaultCampaign, EveryFaultAtFourMoments) {
  const CampaignRun clean(campaign_scenario());
  ASSERT_EQ(clean.outcome.status, store::RunStatus::completed) << clean.outcome.reason;
  ASSERT_TRUE(clean.outcome.endpoint.has_value());
  // Within 0.1 % of the simulator's truth: the fault-free run is a good one.
  EXPECT_NEAR(clean.outcome.endpoint->volume_ml, clean.truth_ml, 1e-3 * clean.truth_ml);
  const auto points = clean.store->load_points(clean.outcome.run_id).value();
  const Moments moments = find_moments(clean);
  const double run_increment_ml = clean.method.dosing.increment_ml;
  for (int m = 0; m < 4; ++m)
    ASSERT_GT(moments.at_s[m], 0.0) << moment_name(kMoments[m]);
  // The burette refilled twice (5 mL cylinder, about 11 mL dosed), and the
  // chosen moments lie where they should.
  EXPECT_EQ(clean.fills.size(), 2u);
  // The first refill comes when the cylinder's 5 mL are out.
  EXPECT_NEAR(moments.fill_start_ml, 5.0, run_increment_ml + 1e-9);
  EXPECT_LT(moments.dose_from_ml, 0.85 * clean.truth_ml);
  EXPECT_GE(moments.dose_to_ml, 0.85 * clean.truth_ml);
  EXPECT_LT(moments.at_s[1], moments.at_s[2]);

  std::ostringstream table;
  table << "| fault | moment | run ended | while | points kept | endpoint error (%) | burette "
           "when the run ended | reason |\n"
        << "|---|---|---|---|---|---|---|---|\n";
  int runs = 0;
  for (const Fault& f : faults()) {
    for (int m = 0; m < 4; ++m) {
      const Moment moment = kMoments[m];
      SCOPED_TRACE(std::string(f.name) + ", " + moment_name(moment));
      CampaignRun run(with_fault(f, moments.at_s[m]));
      ++runs;
      const RunOutcome& o = run.outcome;
      // Never lost: every point the run counted is in the store, in order.
      auto kept = run.store->load_points(o.run_id);
      ASSERT_TRUE(kept.has_value());
      EXPECT_EQ(kept->size(), o.point_count);
      for (std::size_t i = 1; i < kept->size(); ++i)
        EXPECT_GE((*kept)[i].volume_ml, (*kept)[i - 1].volume_ml);
      // The points before the fault are those of the fault-free run.
      for (std::size_t i = 0; i < kept->size() && i < points.size(); ++i) {
        if ((*kept)[i].time_s >= moments.at_s[m])
          break;
        EXPECT_DOUBLE_EQ((*kept)[i].signal, points[i].signal) << "point " << i;
      }
      // Never left dosing. The burette is still once the run has ended,
      // unless the cable was pulled: then no stop reaches it, and it ends the
      // dose or fill under way by itself (or at its host-silence limit, when
      // that comes first). So: still after that limit, no more delivered than
      // the dose under way, and still a minute later.
      const bool moving_at_end = run.bench->burette().moving();
      const bool filling_at_end = run.bench->burette().filling();
      const double counter_at_end = run.bench->burette().counter_ml();
      if (moving_at_end) {
        EXPECT_EQ(f.line, simulator::FaultKind::disconnect);
        EXPECT_EQ(std::string(f.device), "burette");
      }
      run.clock.sleep_for(
          std::chrono::milliseconds(drivers::BuretteClientOptions{}.host_silence_limit_ms));
      EXPECT_FALSE(run.bench->burette().moving());
      const double counter = run.bench->burette().counter_ml();
      EXPECT_LE(counter, counter_at_end + run.method.dosing.increment_ml + 1e-9);
      run.clock.sleep_for(std::chrono::seconds(60));
      EXPECT_DOUBLE_EQ(run.bench->burette().counter_ml(), counter);
      // The stored run says how it ended.
      auto stored = run.store->load_run(o.run_id).value();
      EXPECT_EQ(stored.status, o.status);
      EXPECT_EQ(stored.end_reason, o.reason);

      if (moment == Moment::evaluating) {
        // Every point is in and evaluating needs no device: the run completes
        // with the fault-free endpoint...
        EXPECT_EQ(o.status, store::RunStatus::completed) << o.reason;
        if (o.endpoint) {
          EXPECT_DOUBLE_EQ(o.endpoint->volume_ml, clean.outcome.endpoint->volume_ml);
        }
        // ...and the fault is there for whoever asks next.
        if (f.expected) {
          std::optional<ErrorKind> kind;
          if (f.motor) {
            auto dosed = run.burette->dose(0.1, 10.0);
            EXPECT_FALSE(dosed.has_value());
            if (!dosed)
              kind = dosed.error().kind;
            EXPECT_TRUE(run.burette->stop().has_value());
          } else if (std::string(f.device) == "burette") {
            auto s = run.burette->status();
            EXPECT_FALSE(s.has_value());
            if (!s)
              kind = s.error().kind;
          } else {
            auto r = run.sensor->read();
            EXPECT_FALSE(r.has_value());
            if (!r)
              kind = r.error().kind;
          }
          EXPECT_EQ(kind, f.expected);
        }
      } else if (f.expected) {
        EXPECT_EQ(o.status, store::RunStatus::failed);
        EXPECT_NE(o.reason.find(error_kind_name(*f.expected)), std::string::npos) << o.reason;
        // It failed in the state it was in when the fault struck: a burette
        // fault while filling ends the fill; the electrode is not read while
        // the burette moves, so its fault strikes at the next reading.
        const bool burette = std::string(f.device) == "burette";
        EXPECT_EQ(run.states.failed_in,
                  moment == Moment::filling && burette ? RunState::filling : RunState::titrating);
        // A burette fault while dosing cuts that dose short: its reading is
        // past the dose's start and short of its end (a communication fault
        // leaves the motor to finish the dose or the host-silence stop to
        // end it; a motor fault stops it where it is).
        if (moment == Moment::dosing && f.motor) {
          EXPECT_NE(o.reason.find("mL delivered"), std::string::npos);
          EXPECT_GT(run.bench->burette().counter_ml(), moments.dose_from_ml);
          EXPECT_LT(run.bench->burette().counter_ml(), moments.dose_to_ml);
        }
      } else {
        // A sensor that keeps answering wrongly: the run ends with a result
        // or with a reason, never silently.
        EXPECT_TRUE(o.status == store::RunStatus::completed || !o.reason.empty());
      }

      std::string error = "-";
      if (o.endpoint) {
        char text[32];
        std::snprintf(text, sizeof text, "%+.3f",
                      100.0 * (o.endpoint->volume_ml - run.truth_ml) / run.truth_ml);
        error = text;
      }
      std::string reason = o.reason;
      for (char& c : reason) {
        if (c == '|' || c == '\n')
          c = ' ';
      }
      const std::string in_state =
          o.status == store::RunStatus::failed ? run_state_name(run.states.failed_in) : "-";
      const std::string still = !moving_at_end   ? "still"
                                : filling_at_end ? "ended its fill by itself"
                                                 : "ended its dose by itself";
      table << "| " << f.name << " | " << moment_name(moment) << " | "
            << store::run_status_name(o.status) << " | " << in_state << " | " << kept->size()
            << " | " << error << " | " << still << " | " << reason << " |\n";
    }
  }
  EXPECT_EQ(runs, static_cast<int>(4 * faults().size()));

  char where[256];
  std::snprintf(where, sizeof where,
                "the cylinder refill that began at %.2f mL; the dose from %.2f to %.2f mL; "
                "the wait after it; the moment the run began to evaluate",
                moments.fill_start_ml, moments.dose_from_ml, moments.dose_to_ml);
  const std::string header =
      "Each fault of the simulated burette and electrode switched on at four moments of a "
      "fixed-increment titration (0.05 mL steps) of the demo sample, with a 5 mL cylinder so "
      "that the burette refills during the run: " +
      std::string(where) +
      " (times taken from the fault-free run). In virtual time through the native protocol "
      "and the SQLite store; written by `tests/controller/fault_campaign_test.cpp` (" +
      std::to_string(runs) +
      " runs). In every run the points kept equal the points counted, those before the fault "
      "equal the fault-free run's, the burette delivers nothing beyond the dose under way, and "
      "it stands still from its host-silence limit (3 s) on. \"While\" is the state the run "
      "was in when it failed.\n\n";
  const std::string text = header + table.str();
  std::ofstream(std::string(VEQ_BINARY_DIR) + "/tests/fault-campaign.md") << text;
  if (std::getenv("VEQ_UPDATE_DOCS")) {
    const std::string path = std::string(VEQ_SOURCE_DIR) + "/docs/reliability.md";
    std::ifstream in(path);
    std::stringstream whole;
    whole << in.rdbuf();
    std::string doc = whole.str();
    const std::string begin = "<!-- fault campaign begin -->\n",
                      end = "<!-- fault campaign end -->";
    const auto b = doc.find(begin), e = doc.find(end);
    if (b != std::string::npos && e != std::string::npos && e > b) {
      doc = doc.substr(0, b + begin.size()) + text + doc.substr(e);
      std::ofstream(path) << doc;
    }
  }
}

}  // namespace
}  // namespace veq::controller
