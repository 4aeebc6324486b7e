// Dosing strategies compared on the simulator in virtual time: for a strong
// break, a weak break (conditional log K near 6.5) and a slowly reacting metal,
// 50 seeded samples per strategy; points used, titration time, endpoint error
// and its scatter. Prints a Markdown table (docs/dosing.md keeps the latest).
//
//   build/bin/veq_dosing_bench [samples per cell, default 50]
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <string>
#include <vector>

#include "chemistry/one_to_one.hpp"
#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

using namespace veq;

namespace {

enum class Kind { strong, weak, slow };
const char* kind_name(Kind k) {
  switch (k) {
    case Kind::strong:
      return "strong break";
    case Kind::weak:
      return "weak break (log K' 6.5)";
    case Kind::slow:
      return "slow metal (20 s reaction)";
  }
  return "";
}

simulator::Scenario scenario_for(Kind kind, int seed, double content) {
  auto s = *simulator::parse_scenario(simulator::builtin_scenario("demo_calcium"), "demo");
  s.seed = static_cast<std::uint64_t>(seed);
  s.sample.metal_conc_mol_per_l = content;
  if (kind == Kind::weak)
    s.sample.log10_formation_constant = 7.0;  // log K' = 7.0 - 0.52
  if (kind == Kind::slow)
    s.sample.reaction_time_s = 20.0;
  return s;
}

controller::TitrationMethod method_for(controller::DosingKind dosing, Kind kind,
                                       const simulator::Scenario& s) {
  controller::TitrationMethod m;
  m.dosing.kind = dosing;
  m.max_volume_ml = 20.0;
  if (kind == Kind::slow) {
    m.settling.slow_reaction_factor = 4.0;
    m.settling.max_wait_s = 240.0;
  }
  if (kind == Kind::weak) {
    m.detection.min_break_height = 20.0;
    m.dosing.target_signal_step = 2.0;
    m.detection.window_points = 9;
  }
  if (dosing == controller::DosingKind::approach_preset_signal) {
    // The equivalence potential of this kind of sample, as a previous titration
    // would have shown it (computed here from the simulator's chemistry at the
    // nominal content of the demo scenario, not at each sample's own).
    auto nominal = s;
    nominal.sample.metal_conc_mol_per_l = 0.02;
    drivers::VirtualClock c;
    simulator::SimulatedBench probe(nominal, c);
    m.dosing.preset_signal = probe.electrode().equilibrium_potential_mv(
        chemistry::equivalence_volume_ml(simulator::scenario_chemistry(nominal)));
    m.dosing.preset_tolerance = kind == Kind::weak ? 0.5 : 1.0;
  }
  return m;
}

struct Cell {
  std::vector<double> errors_percent, points, minutes;
  int failures = 0;
};

double mean(const std::vector<double>& v) {
  double s = 0;
  for (double x : v)
    s += x;
  return v.empty() ? 0.0 : s / static_cast<double>(v.size());
}
double sd(const std::vector<double>& v) {
  if (v.size() < 2)
    return 0.0;
  const double m = mean(v);
  double s = 0;
  for (double x : v)
    s += (x - m) * (x - m);
  return std::sqrt(s / static_cast<double>(v.size() - 1));
}

}  // namespace

int main(int argc, char** argv) {
  const int samples = argc > 1 ? std::atoi(argv[1]) : 50;
  const controller::DosingKind strategies[] = {
      controller::DosingKind::fixed_increments, controller::DosingKind::adaptive_increments,
      controller::DosingKind::approach_preset_signal, controller::DosingKind::model_guided};
  std::printf(
      "| sample | strategy | points | titration time (min) | bias (%%) | scatter (%%) | "
      "largest error (%%) | failed |\n|---|---|---|---|---|---|---|---|\n");
  const auto wall_start = std::chrono::steady_clock::now();
  int titrations = 0;
  for (Kind kind : {Kind::strong, Kind::weak, Kind::slow}) {
    for (auto dosing : strategies) {
      Cell cell;
      std::mt19937_64 draw(77);
      std::uniform_real_distribution<double> content(0.017, 0.023);
      for (int seed = 1; seed <= samples; ++seed) {
        const auto scenario = scenario_for(kind, seed, content(draw));
        drivers::VirtualClock clock;
        simulator::SimulatedBench bench(scenario, clock);
        drivers::DeviceLink bl(bench.burette_line(), clock, "burette");
        drivers::DeviceLink sl(bench.electrode_line(), clock, "electrode");
        drivers::BuretteClient burette(bl);
        drivers::PotentialSensorClient sensor(sl);
        controller::Instruments instruments{burette, sensor, clock};
        auto store = std::move(store::SqliteStore::open(":memory:")).value();
        controller::SampleDescription sample;
        sample.sample_id = "bench";
        sample.sample_volume_ml = scenario.sample.volume_ml;
        sample.titrant_conc_mol_per_l = scenario.titrant.label_conc_mol_per_l;
        const auto method = method_for(dosing, kind, scenario);
        const auto outcome = controller::run_titration(instruments, *store, sample, method);
        ++titrations;
        if (outcome.status != store::RunStatus::completed || !outcome.endpoint) {
          ++cell.failures;
          if (std::getenv("VEQ_BENCH_VERBOSE")) {
            std::fprintf(stderr, "%s, %s, seed %d: %s\n", kind_name(kind),
                         controller::dosing_kind_name(dosing), seed, outcome.reason.c_str());
          }
          continue;
        }
        const double truth = bench.true_equivalence_reading_ml();
        cell.errors_percent.push_back(100.0 * (outcome.endpoint->volume_ml - truth) / truth);
        cell.points.push_back(static_cast<double>(outcome.point_count));
        cell.minutes.push_back(outcome.titration_time_s / 60.0);
      }
      double largest = 0;
      for (double e : cell.errors_percent)
        largest = std::max(largest, std::abs(e));
      std::printf("| %s | %s | %.0f | %.1f | %+.3f | %.3f | %.3f | %d |\n", kind_name(kind),
                  controller::dosing_kind_name(dosing), mean(cell.points), mean(cell.minutes),
                  mean(cell.errors_percent), sd(cell.errors_percent), largest, cell.failures);
      std::fflush(stdout);
    }
  }
  const double wall =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - wall_start).count();
  std::printf("\n%d titrations in %.1f s of computer time (%.0f per second)\n", titrations, wall,
              titrations / wall);
  return 0;
}
