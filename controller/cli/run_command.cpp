// `veq run`: titrate one sample against instruments on serial ports (or any
// connection string), on the real clock, on a worker thread; Ctrl-C aborts
// and stops the burette at once.
#include <atomic>
#include <chrono>
#include <csignal>
#include <cstdio>
#include <memory>
#include <string>
#include <thread>

#include "controller/cli/commands.hpp"
#include "controller/run_worker.hpp"
#include "controller/store/sqlite_store.hpp"
#include "drivers/connection.hpp"

namespace veq::cli {

namespace {

std::atomic<bool> g_interrupted{false};
extern "C" void on_interrupt(int) {
  g_interrupted.store(true);
}

struct RunOptions {
  std::string db = store::default_database_path();
  std::string burette;
  std::string electrode;
  controller::SampleDescription sample;
  controller::TitrationMethod method;
  double time_scale = 1.0;
  int host_silence_limit_ms = 3000;
};

class LineObserver final : public controller::RunObserver {
 public:
  void on_point(const store::PointRecord& p) override {
    std::printf("  point %3lld  %8.3f mL  %9.3f mV  drift %6.2f mV/min  settled in %5.1f s\n",
                static_cast<long long>(p.index), p.volume_ml, p.signal, p.drift_per_min,
                p.settle_s);
    std::fflush(stdout);
  }
  void on_message(const std::string& text) override { std::printf("  %s\n", text.c_str()); }
};

void run_one(const RunOptions& o) {
  if (!(o.time_scale > 0.0 && o.time_scale <= 200.0)) {
    throw CLI::ValidationError("--time-scale", "must be above 0 and at most 200");
  }
  auto burette_line = drivers::open_transport(o.burette);
  if (!burette_line)
    throw CLI::Error("DeviceError", burette_line.error().message, 2);
  auto electrode_line = drivers::open_transport(o.electrode);
  if (!electrode_line)
    throw CLI::Error("DeviceError", electrode_line.error().message, 2);
  auto opened = store::SqliteStore::open(o.db);
  if (!opened)
    throw CLI::Error("StoreError", opened.error().message, 2);
  auto store = std::move(opened).value();

  drivers::ScaledClock clock(o.time_scale);
  drivers::DeviceLink burette_link(**burette_line, clock, "burette");
  drivers::DeviceLink sensor_link(**electrode_line, clock, "electrode");
  drivers::BuretteClientOptions burette_options;
  burette_options.host_silence_limit_ms = o.host_silence_limit_ms;
  drivers::BuretteClient burette(burette_link, burette_options);
  drivers::PotentialSensorClient sensor(sensor_link);
  controller::Instruments instruments{burette, sensor, clock};
  LineObserver observer;

  std::printf("titrating %s: burette %s, electrode %s; Ctrl-C aborts\n", o.sample.sample_id.c_str(),
              o.burette.c_str(), o.electrode.c_str());
  g_interrupted.store(false);
  auto previous = std::signal(SIGINT, on_interrupt);
  controller::RunWorker worker(instruments, *store, o.sample, o.method, &observer);
  worker.start();
  while (!worker.finished()) {
    if (g_interrupted.load()) {
      std::printf("  aborting: stopping the burette\n");
      worker.abort();
      break;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  const auto outcome = worker.wait();
  std::signal(SIGINT, previous);
  std::printf("run %lld %s: %s\n", static_cast<long long>(outcome.run_id),
              store::run_status_name(outcome.status), outcome.reason.c_str());
  if (outcome.result) {
    std::printf("endpoint %.4f mL (standard uncertainty %.4f mL); %s %.4f mmol/L = %.2f mg/L\n",
                outcome.result->endpoint_ml, outcome.endpoint->uncertainty_ml,
                o.sample.metal.c_str(), outcome.result->conc_mmol_per_l,
                outcome.result->conc_mg_per_l);
  }
  std::printf("%zu points stored in %s\n", outcome.point_count, o.db.c_str());
  if (outcome.status != store::RunStatus::completed)
    throw CLI::RuntimeError(1);
}

}  // namespace

void add_run_command(CLI::App& app) {
  auto o = std::make_shared<RunOptions>();
  o->sample.sample_id = "sample";
  CLI::App* run = app.add_subcommand(
      "run",
      "Titrate one sample with fixed increments against a burette and an electrode reached by\n"
      "connection strings (serial:/dev/ttyUSB0?baud=9600, serial:/dev/pts/7, tcp:host:port),\n"
      "storing every point as it is measured. Ctrl-C aborts and stops the burette at once.");
  run->add_option("--burette", o->burette, "burette connection string")->required();
  run->add_option("--electrode", o->electrode, "electrode connection string")->required();
  run->add_option("--db", o->db, "SQLite file (default ./veq.sqlite or $VEQ_DB)")
      ->capture_default_str();
  run->add_option("--sample-id", o->sample.sample_id, "sample name")->capture_default_str();
  run->add_option("--sample-volume-ml", o->sample.sample_volume_ml, "aliquot volume, mL")
      ->required();
  run->add_option("--titrant-conc", o->sample.titrant_conc_mol_per_l,
                  "titrant concentration, mol/L")
      ->required();
  run->add_option("--titrant", o->sample.titrant_name, "titrant name")->capture_default_str();
  run->add_option("--metal", o->sample.metal, "metal name")->capture_default_str();
  run->add_option("--molar-mass", o->sample.metal_molar_mass_g_per_mol,
                  "molar mass of the metal, g/mol (for mg/L)")
      ->capture_default_str();
  run->add_option("--increment-ml", o->method.dosing.increment_ml, "volume of each dose, mL")
      ->capture_default_str();
  run->add_option("--max-volume-ml", o->method.max_volume_ml, "never dose beyond this, mL")
      ->capture_default_str();
  run->add_option("--past-endpoint-ml", o->method.volume_past_endpoint_ml,
                  "stop this far past the endpoint, mL")
      ->capture_default_str();
  run->add_option("--dose-rate", o->method.dose_rate_ml_per_min, "dosing rate, mL/min")
      ->capture_default_str();
  run->add_option("--drift-limit", o->method.settling.drift_limit_per_min,
                  "accept a reading when its drift is below this, mV/min")
      ->capture_default_str();
  run->add_option("--time-scale", o->time_scale,
                  "clock seconds per real second; 1 for real instruments, the simulator's factor "
                  "for veq-sim")
      ->capture_default_str();
  run->add_option("--host-silence-limit-ms", o->host_silence_limit_ms,
                  "the burette stops by itself after this much silence from veq, ms of device "
                  "time (500-60000)")
      ->capture_default_str();
  run->callback([o] { run_one(*o); });
}

}  // namespace veq::cli
