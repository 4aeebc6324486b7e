// veq-sim: the simulated burette and electrode of a scenario, served over
// pseudo-terminals so that `veq run` (or any program speaking veq's protocol)
// reaches them through serial ports. Prints the port paths, serves until
// SIGINT or SIGTERM, then exits cleanly. On request it serves every
// instrument of the bench, over TCP on 127.0.0.1 instead of serial ports, and
// lets the burette or electrode speak a device profile's dialect.
#include <signal.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include <CLI/CLI.hpp>

#include "drivers/profile.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "simulator/device_server.hpp"
#include "simulator/profile_device.hpp"
#include "simulator/pseudo_terminal_bench.hpp"

namespace {

struct Options {
  std::string scenario_file;
  double time_scale = 1.0;
  std::string ports_file;
  std::int64_t seed = -1;
  bool all_instruments = false;
  bool tcp = false;
  std::string burette_profile;
  std::string electrode_profile;
  /// Any option that needs the general device server rather than the
  /// two-port bench.
  bool general() const {
    return all_instruments || tcp || !burette_profile.empty() || !electrode_profile.empty();
  }
};

/// The key=value lines scripts read (also printed on standard output).
std::string port_lines(const veq::simulator::PseudoTerminalBench& bench) {
  char truth[64];
  std::snprintf(truth, sizeof truth, "%.4f", bench.true_equivalence_reading_ml());
  char scale[32];
  std::snprintf(scale, sizeof scale, "%g", bench.time_scale());
  return "burette=" + bench.burette_port() + "\nelectrode=" + bench.electrode_port() +
         "\ntime_scale=" + scale + "\ntrue_equivalence_ml=" + truth + "\n";
}

/// Writes the file whole or not at all (a script polling for it never reads
/// half of it): a temporary file beside it, then a rename.
bool write_whole_file(const std::string& path, const std::string& text, std::string* error) {
  const std::string temporary = path + ".part";
  {
    std::ofstream out(temporary, std::ios::trunc);
    out << text;
    out.close();
    if (!out) {
      *error = "cannot write " + temporary;
      return false;
    }
  }
  std::error_code ec;
  std::filesystem::rename(temporary, path, ec);
  if (ec) {
    *error = "cannot rename " + temporary + " to " + path + " (" + ec.message() + ")";
    return false;
  }
  return true;
}

/// Serves every requested instrument through a DeviceServer until a signal
/// in `stop_signals` arrives. Prints (and writes) name=connection lines.
int serve_general(const Options& options, const veq::simulator::Scenario& scenario,
                  sigset_t& stop_signals) {
  using namespace veq::simulator;
  DeviceServer server(options.time_scale);
  SimulatedBench bench(scenario, server.clock());
  std::vector<std::unique_ptr<ProfileSpeakingDevice>> dialects;
  auto speaking = [&](const std::string& profile_file,
                      VirtualDevice& device) -> veq::Result<veq::drivers::ByteDevice*> {
    if (profile_file.empty())
      return static_cast<veq::drivers::ByteDevice*>(&device);
    auto profile = veq::drivers::profile::load_profile(profile_file);
    if (!profile)
      return profile.error();
    dialects.push_back(std::make_unique<ProfileSpeakingDevice>(*profile, device));
    return static_cast<veq::drivers::ByteDevice*>(dialects.back().get());
  };
  std::vector<std::pair<std::string, veq::drivers::ByteDevice*>> served;
  auto burette = speaking(options.burette_profile, bench.burette());
  auto electrode = speaking(options.electrode_profile, bench.electrode());
  for (auto* r : {&burette, &electrode}) {
    if (!*r) {
      std::cerr << "veq-sim: " << r->error().message << "\n";
      return 2;
    }
  }
  served.emplace_back("burette", *burette);
  served.emplace_back("electrode", *electrode);
  if (options.all_instruments) {
    served.emplace_back("auxiliary_doser", &bench.auxiliary_doser());
    served.emplace_back("photometer", &bench.photometer());
    served.emplace_back("balance", &bench.balance());
    served.emplace_back("stirrer", &bench.stirrer());
    served.emplace_back("sample_changer", &bench.sample_changer());
  }
  // A disconnect fault in the scenario closes the device's own line.
  for (const auto& entry : served) {
    const std::string name = entry.first;
    if (VirtualDevice* d = bench.device(name))
      d->on_disconnect([&server, name] { server.pull_soon(name); });
  }
  std::string lines;
  for (const auto& [name, device] : served) {
    auto where = options.tcp ? server.serve_on_tcp(name, *device)
                             : server.serve_on_pseudo_terminal(name, *device);
    if (!where) {
      std::cerr << "veq-sim: " << where.error().message << "\n";
      return 1;
    }
    // Serial ports as bare paths, as the two-port bench prints them.
    const std::string shown = where->rfind("serial:", 0) == 0 ? where->substr(7) : *where;
    lines += name + "=" + shown + "\n";
  }
  char truth[64];
  std::snprintf(truth, sizeof truth, "%.4f", bench.true_equivalence_reading_ml());
  char scale[32];
  std::snprintf(scale, sizeof scale, "%g", options.time_scale);
  lines += std::string("time_scale=") + scale + "\ntrue_equivalence_ml=" + truth + "\n";
  server.run();
  if (!options.ports_file.empty()) {
    std::string error;
    if (!write_whole_file(options.ports_file, lines, &error)) {
      std::cerr << "veq-sim: " << error << "\n";
      return 1;
    }
  }
  std::cout << lines << std::flush;
  std::cerr << "veq-sim: serving '" << scenario.name << "' at " << options.time_scale
            << "x real time, " << served.size() << " instruments over "
            << (options.tcp ? "TCP on 127.0.0.1" : "pseudo-terminals")
            << "; stop with Ctrl-C or SIGTERM\n";
  int received = 0;
  sigwait(&stop_signals, &received);
  server.stop();
  for (const auto& problem : server.problems())
    std::cerr << "veq-sim: while serving: " << problem << "\n";
  if (!options.ports_file.empty()) {
    std::error_code ignored;
    std::filesystem::remove(options.ports_file, ignored);
  }
  std::cerr << "veq-sim: stopped by " << (received == SIGINT ? "SIGINT" : "SIGTERM") << "\n";
  return 0;
}

int serve(const Options& options) {
  using namespace veq::simulator;
  auto scenario = options.scenario_file.empty() ? parse_scenario(builtin_scenario("demo_calcium"),
                                                                 "built-in scenario demo_calcium")
                                                : load_scenario(options.scenario_file);
  if (!scenario) {
    std::cerr << "veq-sim: " << scenario.error().message << "\n";
    return 2;
  }
  if (options.seed >= 0)
    scenario->seed = static_cast<std::uint64_t>(options.seed);

  // SIGINT and SIGTERM are taken by sigwait() below, never by a handler: block
  // them before the serving thread starts so that it inherits the mask.
  sigset_t stop_signals;
  sigemptyset(&stop_signals);
  sigaddset(&stop_signals, SIGINT);
  sigaddset(&stop_signals, SIGTERM);
  pthread_sigmask(SIG_BLOCK, &stop_signals, nullptr);
  if (options.general())
    return serve_general(options, *scenario, stop_signals);

  PseudoTerminalBenchOptions bench_options;
  bench_options.time_scale = options.time_scale;
  auto bench = PseudoTerminalBench::start(*scenario, bench_options);
  if (!bench) {
    std::cerr << "veq-sim: " << bench.error().message << "\n";
    return 1;
  }
  const std::string lines = port_lines(**bench);
  if (!options.ports_file.empty()) {
    std::string error;
    if (!write_whole_file(options.ports_file, lines, &error)) {
      std::cerr << "veq-sim: " << error << "\n";
      return 1;
    }
  }
  std::cout << lines << std::flush;
  std::cerr << "veq-sim: serving '" << scenario->name << "' at " << options.time_scale
            << "x real time (burette " << (*bench)->burette_port() << ", electrode "
            << (*bench)->electrode_port() << "); stop with Ctrl-C or SIGTERM\n";

  int received = 0;
  sigwait(&stop_signals, &received);
  (*bench)->stop();
  for (const auto& problem : (*bench)->problems())
    std::cerr << "veq-sim: while serving: " << problem << "\n";
  if (!options.ports_file.empty()) {
    std::error_code ignored;
    std::filesystem::remove(options.ports_file, ignored);
  }
  std::cerr << "veq-sim: stopped by " << (received == SIGINT ? "SIGINT" : "SIGTERM") << "\n";
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{
      "veq-sim: a simulated motor burette and calcium electrode speaking veq's line protocol\n"
      "over pseudo-terminals, for `veq run --burette PORT --electrode PORT` and for scripts.\n"
      "Prints the port paths (burette=..., electrode=...) and serves until SIGINT or SIGTERM.",
      "veq-sim"};
  Options options;
  app.add_option("--scenario", options.scenario_file,
                 "scenario file (JSON, see docs/scenarios.md); default: the built-in "
                 "demo_calcium scenario")
      ->check(CLI::ExistingFile);
  app.add_option("--time-scale", options.time_scale,
                 "device seconds per real second; the host must use the same factor "
                 "(e.g. `veq run --time-scale`)")
      ->capture_default_str()
      ->check(CLI::Range(0.01, 1000.0));
  app.add_option("--ports-file", options.ports_file,
                 "also write the port lines to this file (removed again on exit)");
  app.add_option("--seed", options.seed,
                 "seed of the simulated noise and delivery errors (default: the scenario's)")
      ->check(CLI::NonNegativeNumber);
  app.add_flag("--all-instruments", options.all_instruments,
               "also serve the auxiliary doser, photometer, balance, stirrer and sample changer "
               "(printed as auxiliary_doser=..., photometer=... lines)");
  app.add_flag("--tcp", options.tcp,
               "serve over TCP on 127.0.0.1 (as serial-to-network converters) instead of "
               "pseudo-terminals; the lines then read burette=tcp:127.0.0.1:PORT");
  app.add_option("--burette-profile", options.burette_profile,
                 "the burette speaks this device profile's dialect (docs/device-profiles.md), "
                 "e.g. drivers/profiles/stonebridge_burette.profile")
      ->check(CLI::ExistingFile);
  app.add_option("--electrode-profile", options.electrode_profile,
                 "the electrode's meter speaks this device profile's dialect, e.g. "
                 "drivers/profiles/lantern_meter.profile")
      ->check(CLI::ExistingFile);
  CLI11_PARSE(app, argc, argv);
  try {
    return serve(options);
  } catch (const std::exception& e) {
    std::cerr << "veq-sim: " << e.what() << "\n";
    return 1;
  }
}
