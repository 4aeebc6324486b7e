// Dosing strategies compared on the simulator in virtual time: for a strong
// break, a weak break (conditional log K near 6.5) and a slowly reacting metal,
// 50 seeded samples per strategy; points used, titration time, endpoint error
// and its scatter. Every run's finished curve is evaluated twice, by the
// derivative method and by the model fit of the sample's chemistry (both are
// stored by the run), so that each strategy is judged with either final
// evaluation. Each scatter is compared with that of fixed 0.05 mL steps
// evaluated the same way: the ratio of the standard deviations with its 95 %
// confidence interval, since 50 samples know a standard deviation only to
// about +-20 %. Prints Markdown tables (docs/titration.md keeps the latest).
//
//   build/bin/veq_dosing_bench [samples per cell, default 50]
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <optional>
#include <random>
#include <string>
#include <vector>

#include "chemistry/one_to_one.hpp"
#include "common/result.hpp"
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

/// The lab's description of the sample for the model fit: the nominal
/// content (the samples differ from it by up to 15 %), the buffer's pH and the
/// titrant's label concentration. The constant, the electrode's zero and
/// slope are fitted, so the tabulated calcium-EDTA constant is only a start.
nlohmann::json nominal_sample_document(const simulator::Scenario& s) {
  return {{"sample_volume_ml", s.sample.volume_ml},
          {"metals", {{{"name", "Ca"}, {"conc_mol_per_l", 0.02}}}},
          {"ph", s.sample.ph},
          {"titrant", {{"name", "EDTA"}, {"conc_mol_per_l", s.titrant.label_conc_mol_per_l}}},
          {"signal", {{"kind", "potential"}, {"metal", "Ca"}}}};
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
  m.endpoint_method = "model";
  m.endpoint_options = {{"sample", nominal_sample_document(s)}};
  return m;
}

struct Errors {
  std::vector<double> percent;
  int failures = 0;
};

struct Cell {
  Errors derivative, model;
  std::vector<double> points, minutes;
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
double largest_abs(const std::vector<double>& v) {
  double l = 0;
  for (double x : v)
    l = std::max(l, std::abs(x));
  return l;
}

/// The largest break of a stored evaluation by `method`, if any.
std::optional<double> stored_endpoint_ml(const std::vector<store::EvaluationRecord>& evaluations,
                                         const std::string& method) {
  for (const auto& e : evaluations) {
    if (e.method != method || e.endpoints.empty())
      continue;
    const store::EndpointRecord* best = &e.endpoints.front();
    for (const auto& p : e.endpoints) {
      if (p.steepness > best->steepness)
        best = &p;
    }
    return best->volume_ml;
  }
  return std::nullopt;
}

/// Whether the run's model fit gave its result: an endpoint and no flag that
/// makes the run fall back to the derivative (controller/titration.cpp).
bool model_fit_accepted(const std::vector<store::EvaluationRecord>& evaluations) {
  for (const auto& e : evaluations) {
    if (e.method == "model") {
      return !e.endpoints.empty() && e.flags.find("poor_fit") == std::string::npos &&
             e.flags.find("fit_not_converged") == std::string::npos;
    }
  }
  return false;
}

/// Ratio of two standard deviations with its 95 % confidence interval. The
/// log of a sample standard deviation of n normal values has a standard
/// deviation of about 1/sqrt(2 (n - 1)) (delta method); for n = 50 in both
/// this gives the factor 1.323, against 1.327 from the exact F quantile
/// (scipy.stats.f.ppf(0.975, 49, 49) = 1.762, whose square root it is).
struct SdRatio {
  double ratio = 0.0, low = 0.0, high = 0.0;
};
SdRatio sd_ratio(const std::vector<double>& a, const std::vector<double>& b) {
  SdRatio r;
  if (a.size() < 2 || b.size() < 2 || sd(b) <= 0.0)
    return r;
  r.ratio = sd(a) / sd(b);
  const double log_sd = std::sqrt(1.0 / (2.0 * static_cast<double>(a.size() - 1)) +
                                  1.0 / (2.0 * static_cast<double>(b.size() - 1)));
  r.low = r.ratio * std::exp(-1.96 * log_sd);
  r.high = r.ratio * std::exp(1.96 * log_sd);
  return r;
}

}  // namespace

int main(int argc, char** argv) {
  const int samples = argc > 1 ? std::atoi(argv[1]) : 50;
  const controller::DosingKind strategies[] = {
      controller::DosingKind::fixed_increments, controller::DosingKind::adaptive_increments,
      controller::DosingKind::approach_preset_signal, controller::DosingKind::model_guided};
  const auto wall_start = std::chrono::steady_clock::now();
  int titrations = 0;
  struct Row {
    Kind kind;
    controller::DosingKind dosing;
    Cell cell;
  };
  std::vector<Row> rows;
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
        cell.points.push_back(static_cast<double>(outcome.point_count));
        cell.minutes.push_back(outcome.titration_time_s / 60.0);
        auto record = [&](Errors& errors, std::optional<double> endpoint_ml) {
          if (!endpoint_ml) {
            ++errors.failures;
            return;
          }
          errors.percent.push_back(100.0 * (*endpoint_ml - truth) / truth);
        };
        if (dosing == controller::DosingKind::approach_preset_signal) {
          // Its endpoint is where the preset signal was held, whatever the evaluation.
          record(cell.derivative, outcome.endpoint->volume_ml);
          record(cell.model, outcome.endpoint->volume_ml);
          continue;
        }
        const auto evaluations = store->load_evaluations(outcome.run_id);
        if (!evaluations) {
          ++cell.failures;
          continue;
        }
        record(cell.derivative, stored_endpoint_ml(*evaluations, "derivative"));
        // The run's own result: the model fit's endpoint, or the derivative's
        // when the fit was refused (counted as failed in the model-fit row).
        record(cell.model, outcome.endpoint->volume_ml);
        if (!model_fit_accepted(*evaluations))
          ++cell.model.failures;
      }
      rows.push_back({kind, dosing, std::move(cell)});
      std::fprintf(stderr, "%s, %s done\n", kind_name(kind), controller::dosing_kind_name(dosing));
    }
  }
  const double wall =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - wall_start).count();

  std::printf(
      "| sample | strategy | final evaluation | points | titration time (min) | time / fixed | "
      "bias (%%) | scatter (%%) | largest error (%%) | scatter / fixed (95 %% interval) | "
      "failed |\n|---|---|---|---|---|---|---|---|---|---|---|\n");
  for (const auto& row : rows) {
    const Row* fixed = nullptr;
    for (const auto& r : rows) {
      if (r.kind == row.kind && r.dosing == controller::DosingKind::fixed_increments)
        fixed = &r;
    }
    for (bool model : {false, true}) {
      const Errors& e = model ? row.cell.model : row.cell.derivative;
      const Errors& f = model ? fixed->cell.model : fixed->cell.derivative;
      const auto ratio = sd_ratio(e.percent, f.percent);
      std::printf(
          "| %s | %s | %s | %.0f | %.1f | %.2f | %+.4f | %.4f | %.4f | %.2f (%.2f-%.2f) | "
          "%d |\n",
          kind_name(row.kind), controller::dosing_kind_name(row.dosing),
          model ? "model fit" : "derivative", mean(row.cell.points), mean(row.cell.minutes),
          mean(row.cell.minutes) / mean(fixed->cell.minutes), mean(e.percent), sd(e.percent),
          largest_abs(e.percent), ratio.ratio, ratio.low, ratio.high,
          row.cell.failures + e.failures);
    }
  }
  std::printf("\n%d titrations in %.1f s of computer time (%.0f per second)\n", titrations, wall,
              titrations / wall);
  return 0;
}
