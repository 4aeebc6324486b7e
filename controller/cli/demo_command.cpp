// `veq demo`: three samples of an invented scenario titrated unattended on
// simulated instruments in virtual time, stored in an SQLite file.
#include <cmath>
#include <cstdio>
#include <iostream>
#include <memory>
#include <string>

#include "controller/cli/commands.hpp"
#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"

namespace veq::cli {

namespace {

struct DemoOptions {
  std::string db = "veq-demo.sqlite";
  std::string scenario_file;
  bool verbose = false;
};

/// One sample of the demo series: what the lab calls it and, hidden from the
/// controller, what it truly contains.
struct DemoSample {
  const char* id;
  double true_conc_mol_per_l;
  std::uint64_t seed_offset;
};

class PrintingObserver final : public controller::RunObserver {
 public:
  explicit PrintingObserver(bool verbose) : verbose_(verbose) {}
  void on_point(const store::PointRecord& p) override {
    if (!verbose_)
      return;
    std::printf("    point %3lld  %7.3f mL  %9.3f mV  settled in %4.1f s\n",
                static_cast<long long>(p.index), p.volume_ml, p.signal, p.settle_s);
  }
  void on_message(const std::string& text) override {
    if (verbose_)
      std::printf("    %s\n", text.c_str());
  }

 private:
  bool verbose_;
};

int run_demo(const DemoOptions& options) {
  Result<simulator::Scenario> scenario =
      options.scenario_file.empty()
          ? simulator::parse_scenario(simulator::builtin_scenario("demo_calcium"),
                                      "built-in scenario demo_calcium")
          : simulator::load_scenario(options.scenario_file);
  if (!scenario) {
    std::cerr << "veq demo: " << scenario.error().message << "\n";
    return 2;
  }
  auto store = store::SqliteStore::open(options.db);
  if (!store) {
    std::cerr << "veq demo: " << store.error().message << "\n";
    return 2;
  }

  std::printf("veq demo: %s\n", scenario->name.c_str());
  std::printf("  simulated burette and calcium electrode in virtual time; data in %s\n\n",
              options.db.c_str());

  // The lab's view: aliquot volume and titrant label. The true contents are
  // the simulator's and are printed only for comparison.
  const DemoSample samples[] = {
      {"rinse-water-A", scenario->sample.metal_conc_mol_per_l, 0},
      {"rinse-water-B", scenario->sample.metal_conc_mol_per_l * 0.874, 1},
      {"rinse-water-C", scenario->sample.metal_conc_mol_per_l * 1.163, 2},
  };
  controller::FixedIncrementMethod method;
  method.name = "calcium, fixed 0.05 mL increments";
  int failures = 0;
  int index = 0;
  for (const auto& s : samples) {
    ++index;
    simulator::Scenario truth = *scenario;
    truth.sample.metal_conc_mol_per_l = s.true_conc_mol_per_l;
    truth.seed = scenario->seed + s.seed_offset;
    drivers::VirtualClock clock;
    simulator::SimulatedBench bench(truth, clock);
    drivers::DeviceLink burette_link(bench.burette_line(), clock, "burette");
    drivers::DeviceLink sensor_link(bench.electrode_line(), clock, "electrode");
    drivers::BuretteClient burette(burette_link);
    drivers::PotentialSensorClient sensor(sensor_link);
    controller::Instruments instruments{burette, sensor, clock};

    controller::SampleDescription sample;
    sample.sample_id = s.id;
    sample.series = "demo";
    sample.sample_volume_ml = truth.sample.volume_ml;
    sample.metal = truth.sample.metal;
    sample.titrant_name = truth.titrant.name;
    sample.titrant_conc_mol_per_l = truth.titrant.label_conc_mol_per_l;
    method.max_volume_ml =
        std::min(40.0, 2.5 * truth.sample.metal_conc_mol_per_l * truth.sample.volume_ml /
                           truth.titrant.label_conc_mol_per_l);

    std::printf("sample %d/3  %s  (%.2f mL aliquot, %s %.4f mol/L)\n", index, s.id,
                sample.sample_volume_ml, sample.titrant_name.c_str(),
                sample.titrant_conc_mol_per_l);
    PrintingObserver observer(options.verbose);
    const auto outcome =
        controller::run_fixed_increment_titration(instruments, **store, sample, method, &observer);
    const double truth_ml = bench.true_equivalence_reading_ml();
    const double true_mmol_per_l = truth.sample.metal_conc_mol_per_l * 1000.0;
    if (outcome.status != store::RunStatus::completed || !outcome.result) {
      ++failures;
      std::printf("  FAILED after %zu points: %s\n", outcome.point_count, outcome.reason.c_str());
    } else {
      const auto& r = *outcome.result;
      std::printf(
          "  endpoint      %8.3f mL  (+/- %.3f mL)   simulator's true equivalence %8.3f mL"
          "  (%+.3f %%)\n",
          r.endpoint_ml, outcome.endpoint->uncertainty_ml, truth_ml,
          100.0 * (r.endpoint_ml - truth_ml) / truth_ml);
      std::printf("  %-12s  %8.3f mmol/L = %.1f mg/L    true content %8.3f mmol/L\n",
                  sample.metal.c_str(), r.conc_mmol_per_l, r.conc_mg_per_l, true_mmol_per_l);
      std::printf("  %zu points in %.1f min of titration; %s\n", outcome.point_count,
                  clock.now_s() / 60.0, outcome.reason.c_str());
    }
    std::printf("  stored as run %lld in %s\n\n", static_cast<long long>(outcome.run_id),
                options.db.c_str());
  }
  std::printf("Look at the stored runs with: veq runs --db %s\n", options.db.c_str());
  return failures == 0 ? 0 : 1;
}

}  // namespace

void add_demo_command(CLI::App& app) {
  auto options = std::make_shared<DemoOptions>();
  CLI::App* demo = app.add_subcommand(
      "demo",
      "Titrate a short unattended series of three invented samples on simulated instruments\n"
      "(burette and calcium electrode speaking veq's protocol in memory, in virtual time), store\n"
      "every point in an SQLite file, and print each endpoint beside the simulator's truth.");
  demo->add_option("--db", options->db, "SQLite file to store the runs in (created if absent)")
      ->capture_default_str();
  demo->add_option("--scenario", options->scenario_file,
                   "scenario file (JSON, see docs/scenarios.md) instead of the built-in one");
  demo->add_flag("--verbose", options->verbose, "print every point and device message");
  demo->callback([options] {
    const int code = run_demo(*options);
    if (code != 0)
      throw CLI::RuntimeError(code);
  });
}

}  // namespace veq::cli
