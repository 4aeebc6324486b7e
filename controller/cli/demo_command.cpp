// `veq demo`: three samples of an invented scenario titrated unattended on
// simulated instruments in virtual time, stored in an SQLite file.
#include <cmath>
#include <cstdio>
#include <iostream>
#include <memory>
#include <string>

#include "controller/cli/commands.hpp"
#include "controller/run_worker.hpp"
#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "drivers/connection.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/pseudo_terminal_bench.hpp"

namespace veq::cli {

namespace {

struct DemoOptions {
  std::string db = "veq-demo.sqlite";
  std::string scenario_file;
  bool verbose = false;
  bool in_memory = false;
  /// Device seconds per real second over pseudo-terminals: 100 makes each
  /// 30-minute titration last about 20 s.
  double time_scale = 100.0;
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
  PrintingObserver(bool verbose, std::string name) : verbose_(verbose), name_(std::move(name)) {}
  // Called on each sample's worker thread: one printf per line keeps lines whole.
  void on_point(const store::PointRecord& p) override {
    if (!verbose_)
      return;
    std::printf("  %s point %3lld  %7.3f mL  %9.3f mV  settled in %4.1f s\n", name_.c_str(),
                static_cast<long long>(p.index), p.volume_ml, p.signal, p.settle_s);
  }
  void on_message(const std::string& text) override {
    if (verbose_)
      std::printf("  %s: %s\n", name_.c_str(), text.c_str());
  }

 private:
  bool verbose_;
  std::string name_;
};

/// One sample's devices and clients, on either path.
struct SampleBench {
  std::unique_ptr<drivers::Clock> clock;
  std::unique_ptr<simulator::SimulatedBench> memory;    // --in-memory
  std::unique_ptr<simulator::PseudoTerminalBench> pty;  // default
  std::unique_ptr<drivers::Transport> burette_line, electrode_line;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<controller::Instruments> instruments;
  double truth_ml = 0.0;
};

Result<void> build_bench(SampleBench& b, const simulator::Scenario& truth,
                         const DemoOptions& options) {
  drivers::BuretteClientOptions burette_options;
  drivers::Transport* burette_line = nullptr;
  drivers::Transport* electrode_line = nullptr;
  if (options.in_memory) {
    b.clock = std::make_unique<drivers::VirtualClock>();
    b.memory = std::make_unique<simulator::SimulatedBench>(truth, *b.clock);
    burette_line = &b.memory->burette_line();
    electrode_line = &b.memory->electrode_line();
    b.truth_ml = b.memory->true_equivalence_reading_ml();
  } else {
    simulator::PseudoTerminalBenchOptions pty_options;
    pty_options.time_scale = options.time_scale;
    auto pty = simulator::PseudoTerminalBench::start(truth, pty_options);
    if (!pty)
      return pty.error();
    b.pty = std::move(pty).value();
    b.clock = std::make_unique<drivers::ScaledClock>(options.time_scale);
    auto bl = drivers::open_transport(b.pty->burette_connection());
    if (!bl)
      return bl.error();
    auto el = drivers::open_transport(b.pty->electrode_connection());
    if (!el)
      return el.error();
    b.burette_line = std::move(bl).value();
    b.electrode_line = std::move(el).value();
    burette_line = b.burette_line.get();
    electrode_line = b.electrode_line.get();
    b.truth_ml = b.pty->true_equivalence_reading_ml();
    // Time runs faster than real time here: give the burette's host-silence
    // stop 20 s of device time so that a scheduling pause of the host process
    // (a fraction of a real second) cannot trip it.
    burette_options.host_silence_limit_ms = 20000;
  }
  b.burette_link = std::make_unique<drivers::DeviceLink>(*burette_line, *b.clock, "burette");
  b.sensor_link = std::make_unique<drivers::DeviceLink>(*electrode_line, *b.clock, "electrode");
  b.burette = std::make_unique<drivers::BuretteClient>(*b.burette_link, burette_options);
  b.sensor = std::make_unique<drivers::PotentialSensorClient>(*b.sensor_link);
  b.instruments = std::make_unique<controller::Instruments>(
      controller::Instruments{*b.burette, *b.sensor, *b.clock});
  return {};
}

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
  if (!options.in_memory && !(options.time_scale > 0.0 && options.time_scale <= 200.0)) {
    std::cerr << "veq demo: --time-scale must be above 0 and at most 200\n";
    return 2;
  }

  std::printf("veq demo: %s\n", scenario->name.c_str());
  if (options.in_memory) {
    std::printf("  simulated burette and calcium electrode in memory, in virtual time\n");
  } else {
    std::printf(
        "  simulated burette and calcium electrode on pseudo-terminals, %g times real "
        "time;\n  the three samples are titrated side by side, each on its own thread\n",
        options.time_scale);
  }
  std::printf("  data in %s\n\n", options.db.c_str());

  // The lab's view: aliquot volume and titrant label. The true contents are
  // the simulator's and are printed only for comparison.
  const DemoSample samples[] = {
      {"rinse-water-A", scenario->sample.metal_conc_mol_per_l, 0},
      {"rinse-water-B", scenario->sample.metal_conc_mol_per_l * 0.874, 1},
      {"rinse-water-C", scenario->sample.metal_conc_mol_per_l * 1.163, 2},
  };
  constexpr int kSamples = 3;
  SampleBench benches[kSamples];
  simulator::Scenario truths[kSamples];
  controller::SampleDescription descriptions[kSamples];
  // One store connection per worker: each run writes through its own.
  std::unique_ptr<store::SqliteStore> stores[kSamples];
  std::unique_ptr<PrintingObserver> observers[kSamples];
  std::unique_ptr<controller::RunWorker> workers[kSamples];
  controller::TitrationMethod method;
  method.name = "calcium, fixed 0.05 mL increments";
  for (int i = 0; i < kSamples; ++i) {
    const auto& s = samples[i];
    truths[i] = *scenario;
    truths[i].sample.metal_conc_mol_per_l = s.true_conc_mol_per_l;
    truths[i].seed = scenario->seed + s.seed_offset;
    auto opened = store::SqliteStore::open(options.db);
    if (!opened) {
      std::cerr << "veq demo: " << opened.error().message << "\n";
      return 2;
    }
    stores[i] = std::move(opened).value();
    if (auto built = build_bench(benches[i], truths[i], options); !built) {
      std::cerr << "veq demo: cannot set up the simulated bench: " << built.error().message << "\n";
      return 2;
    }
    auto& d = descriptions[i];
    d.sample_id = s.id;
    d.series = "demo";
    d.sample_volume_ml = truths[i].sample.volume_ml;
    d.metal = truths[i].sample.metal;
    d.titrant_name = truths[i].titrant.name;
    d.titrant_conc_mol_per_l = truths[i].titrant.label_conc_mol_per_l;
    controller::TitrationMethod m = method;
    m.max_volume_ml =
        std::min(40.0, 2.5 * truths[i].sample.metal_conc_mol_per_l * truths[i].sample.volume_ml /
                           truths[i].titrant.label_conc_mol_per_l);
    // Over pseudo-terminals at 100 times real time every millisecond the host
    // waits for the machine counts as a tenth of a device second: on a busy
    // computer a run can take far more device time than on a bench, so the
    // time limit must not be what ends the demo.
    if (!options.in_memory)
      m.time_limit_s = 24.0 * 3600.0;
    observers[i] = std::make_unique<PrintingObserver>(options.verbose, s.id);
    workers[i] = std::make_unique<controller::RunWorker>(*benches[i].instruments, *stores[i], d, m,
                                                         observers[i].get());
    if (options.in_memory) {
      // Virtual time: one after another, deterministic.
      workers[i]->start();
      workers[i]->wait();
    }
  }
  if (!options.in_memory) {
    for (auto& w : workers)
      w->start();
  }

  int failures = 0;
  for (int i = 0; i < kSamples; ++i) {
    const auto outcome = workers[i]->wait();
    const auto& sample = descriptions[i];
    const double truth_ml = benches[i].truth_ml;
    const double true_mmol_per_l = truths[i].sample.metal_conc_mol_per_l * 1000.0;
    std::printf("sample %d/3  %s  (%.2f mL aliquot, %s %.4f mol/L)\n", i + 1,
                sample.sample_id.c_str(), sample.sample_volume_ml, sample.titrant_name.c_str(),
                sample.titrant_conc_mol_per_l);
    if (outcome.status != store::RunStatus::completed || !outcome.result) {
      ++failures;
      std::printf("  FAILED after %zu points: %s\n", outcome.point_count, outcome.reason.c_str());
    } else {
      const auto& r = *outcome.result;
      std::printf(
          "  endpoint      %8.3f mL  (+/- %.4f mL)  simulator's true equivalence %8.3f mL"
          "  (%+.3f %%)\n",
          r.endpoint_ml, outcome.endpoint->uncertainty_ml, truth_ml,
          100.0 * (r.endpoint_ml - truth_ml) / truth_ml);
      std::printf("  %-12s  %8.3f mmol/L = %.1f mg/L    true content %8.3f mmol/L\n",
                  sample.metal.c_str(), r.conc_mmol_per_l, r.conc_mg_per_l, true_mmol_per_l);
      std::printf("  %zu points; %s\n", outcome.point_count, outcome.reason.c_str());
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
      "(a burette and a calcium electrode speaking veq's protocol over pseudo-terminals, faster\n"
      "than real time; or in memory in virtual time), store every point in an SQLite file, and\n"
      "print each endpoint beside the simulator's truth.");
  demo->add_option("--db", options->db, "SQLite file to store the runs in (created if absent)")
      ->capture_default_str();
  demo->add_option("--scenario", options->scenario_file,
                   "scenario file (JSON, see docs/scenarios.md) instead of the built-in one");
  demo->add_flag("--verbose", options->verbose, "print every point and device message");
  demo->add_flag("--in-memory", options->in_memory,
                 "talk to the simulated devices in memory in virtual time (fast, deterministic) "
                 "instead of over pseudo-terminals");
  demo->add_option("--time-scale", options->time_scale,
                   "over pseudo-terminals: simulated seconds per real second (at most 200)")
      ->capture_default_str();
  demo->callback([options] {
    const int code = run_demo(*options);
    if (code != 0)
      throw CLI::RuntimeError(code);
  });
}

}  // namespace veq::cli
