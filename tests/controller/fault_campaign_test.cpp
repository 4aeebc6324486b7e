// Fault campaign: every simulator fault of the burette and the electrode at
// three moments of a titration (early on the flat branch, just before the
// equivalence point, past it), whole runs in virtual time through the real
// protocol and store. For each: the expected end and reason, no point lost,
// the burette not moving. The table of outcomes is written to
// <build>/tests/fault-campaign.md, and to docs/reliability.md when the
// environment variable VEQ_UPDATE_DOCS is set.
#include <gtest/gtest.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <memory>
#include <optional>
#include <sstream>
#include <string>
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
  /// The run must fail with this kind of error (nullopt: it may complete).
  std::optional<ErrorKind> expected;
};

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
      {"burette reservoir empty", "burette", {}, MotorFaultKind::empty, ErrorKind::device_fault},
  };
  return all;
}

using testing::demo_scenario;

// A titration of the demo sample with fixed increments up to 20 mL, run at
// once; the truth is the simulator's, read before the run.
struct CampaignRun : testing::Trial {
  RunOutcome outcome;
  double truth_ml = 0.0;

  explicit CampaignRun(const simulator::Scenario& s) : Trial(s) {
    sample.sample_id = "campaign";
    truth_ml = bench->true_equivalence_reading_ml();
    outcome = run();
  }
};

std::string moment_name(int moment) {
  static const char* names[] = {"early (flat branch)", "just before the equivalence point",
                                "past the equivalence point"};
  return names[moment];
}

TEST(FaultCampaign, EveryFaultAtThreeMoments) {
  // The fault-free run sets the clock: when it reached 20 %, 85 % and 105 %
  // of the equivalence volume.
  const CampaignRun clean(demo_scenario());
  ASSERT_EQ(clean.outcome.status, store::RunStatus::completed) << clean.outcome.reason;
  auto points = clean.store->load_points(clean.outcome.run_id).value();
  double moments_s[3] = {0.0, 0.0, 0.0};
  const double fractions[3] = {0.20, 0.85, 1.05};
  for (int m = 0; m < 3; ++m) {
    for (const auto& p : points) {
      if (p.volume_ml >= fractions[m] * clean.truth_ml) {
        moments_s[m] = p.time_s;
        break;
      }
    }
    ASSERT_GT(moments_s[m], 0.0);
  }

  std::ostringstream table;
  table << "| fault | moment | run ended | points kept | endpoint error (%) | reason |\n"
        << "|---|---|---|---|---|---|\n";
  int runs = 0;
  for (const Fault& f : faults()) {
    for (int m = 0; m < 3; ++m) {
      SCOPED_TRACE(std::string(f.name) + ", " + moment_name(m));
      auto scenario = demo_scenario();
      // Device time and the run clock start together in these runs.
      if (f.line) {
        simulator::FaultPlan plan;
        plan.kind = *f.line;
        plan.after_s = moments_s[m];
        (std::string(f.device) == "burette" ? scenario.burette_fault : scenario.electrode_fault) =
            plan;
      } else {
        scenario.burette.motor_fault = {*f.motor, moments_s[m]};
      }
      CampaignRun run(scenario);
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
        if ((*kept)[i].time_s >= moments_s[m])
          break;
        EXPECT_DOUBLE_EQ((*kept)[i].signal, points[i].signal) << "point " << i;
      }
      // Never left dosing: the burette is still, and still a minute later.
      EXPECT_FALSE(run.bench->burette().moving());
      const double counter = run.bench->burette().counter_ml();
      run.clock.sleep_for(std::chrono::seconds(60));
      EXPECT_DOUBLE_EQ(run.bench->burette().counter_ml(), counter);
      // The stored run says how it ended.
      auto stored = run.store->load_run(o.run_id).value();
      EXPECT_EQ(stored.status, o.status);
      EXPECT_EQ(stored.end_reason, o.reason);
      if (f.expected) {
        EXPECT_EQ(o.status, store::RunStatus::failed);
        EXPECT_NE(o.reason.find(error_kind_name(*f.expected)), std::string::npos) << o.reason;
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
      table << "| " << f.name << " | " << moment_name(m) << " | "
            << store::run_status_name(o.status) << " | " << kept->size() << " | " << error << " | "
            << reason << " |\n";
    }
  }
  EXPECT_EQ(runs, static_cast<int>(3 * faults().size()));

  const std::string header =
      "Each fault of the simulated burette and electrode switched on at three moments of a "
      "fixed-increment titration of the demo sample (the moments the fault-free run reached 20 %, "
      "85 % and 105 % of the equivalence volume), in virtual time through the native protocol "
      "and the SQLite store. Written by `tests/controller/fault_campaign_test.cpp` (" +
      std::to_string(runs) +
      " runs); in every run the points kept equal the points counted, those before the fault "
      "equal the fault-free run's, and the burette stands still.\n\n";
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
