// `veq trials`: for developers of endpoint methods. Simulates seeded curves of
// a scenario with known equivalence volumes, evaluates them with one or more
// methods, and prints each method's bias, scatter and uncertainty coverage;
// optionally writes every outcome as CSV and a picture as SVG.
#include <chrono>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "chemistry/constants.hpp"
#include "chemistry/constants_file.hpp"
#include "controller/cli/commands.hpp"
#include "detection/trials.hpp"

namespace veq::cli {

namespace {

using nlohmann::json;

struct TrialsOptions {
  std::string scenario = "strong_break";
  std::string scenario_file;
  int curves = 50;
  long long first_seed = 1;
  std::vector<std::string> methods;
  std::string csv_file;
  std::string svg_file;
  std::string constants_file;
  bool list = false;
  bool print_scenario = false;
  bool json_output = false;
  // Overrides of the scenario's recording (negative: keep the scenario's).
  double noise = -1.0;
  double step_ml = -1.0;
  double fine_step_ml = -1.0;
  double lag_s = -1.0;
  double reading_interval_s = -1.0;
  double drift_mv_per_min = -1e300;
  int spikes = -1;
};

std::string read_text(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    throw CLI::Error("FileError", "cannot open '" + path + "'", 2);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

void write_text(const std::string& path, const std::string& text) {
  std::ofstream out(path, std::ios::binary);
  out << text;
  if (!out)
    throw CLI::Error("FileError", "cannot write '" + path + "'", 2);
}

detection::TrialScenario load_scenario(const TrialsOptions& o) {
  veq::Result<detection::TrialScenario> scenario =
      o.scenario_file.empty() ? detection::builtin_trial_scenario(o.scenario)
                              : [&]() -> veq::Result<detection::TrialScenario> {
    const json j = json::parse(read_text(o.scenario_file), nullptr, false);
    if (j.is_discarded())
      return veq::make_error(veq::ErrorKind::invalid_input, "not valid JSON");
    return detection::trial_scenario_from_json(j);
  }();
  if (!scenario) {
    throw CLI::Error(
        "TrialsError",
        (o.scenario_file.empty() ? "" : o.scenario_file + ": ") + scenario.error().message, 2);
  }
  detection::TrialScenario s = std::move(*scenario);
  if (o.noise >= 0.0)
    s.noise = o.noise;
  if (o.step_ml > 0.0)
    s.step_ml = o.step_ml;
  if (o.fine_step_ml >= 0.0)
    s.fine_step_ml = o.fine_step_ml;
  if (o.lag_s >= 0.0)
    s.lag_s = o.lag_s;
  if (o.reading_interval_s >= 0.0)
    s.reading_interval_s = o.reading_interval_s;
  if (o.drift_mv_per_min > -1e299)
    s.drift_mv_per_min = o.drift_mv_per_min;
  if (o.spikes >= 0)
    s.spikes = o.spikes;
  return s;
}

void run_trials_command(const TrialsOptions& o) {
  if (o.list) {
    for (std::string_view name : detection::trial_scenario_names()) {
      const auto s = detection::builtin_trial_scenario(name).value();
      std::printf("%-20s %s\n", s.name.c_str(), s.description.c_str());
    }
    return;
  }
  const detection::TrialScenario scenario = load_scenario(o);
  if (o.print_scenario) {
    std::cout << detection::to_json(scenario).dump(2) << "\n";
    return;
  }
  if (o.curves < 1 || o.curves > 100000)
    throw CLI::ValidationError("--curves", "must lie within 1..100000");
  auto library = o.constants_file.empty() ? chemistry::builtin_constants_library()
                                          : chemistry::load_constants_library(o.constants_file);
  if (!library)
    throw CLI::Error("TrialsError", library.error().message, 2);

  std::vector<detection::TrialMethod> methods;
  const std::vector<std::string> specs =
      o.methods.empty() ? std::vector<std::string>{"derivative", "gran", "model"} : o.methods;
  for (const auto& spec : specs) {
    auto m = detection::parse_trial_method(spec);
    if (!m)
      throw CLI::ValidationError("--method", m.error().message);
    methods.push_back(std::move(*m));
  }

  // Simulate.
  std::vector<detection::TrialCurve> curves;
  curves.reserve(static_cast<std::size_t>(o.curves));
  for (int k = 0; k < o.curves; ++k) {
    const auto seed = static_cast<std::uint64_t>(o.first_seed + k);
    auto c = detection::simulate_trial_curve(scenario, seed, *library);
    if (!c) {
      throw CLI::Error("TrialsError",
                       "simulating seed " + std::to_string(seed) + ": " + c.error().message, 2);
    }
    curves.push_back(std::move(*c));
  }

  // Evaluate, timing each method.
  std::vector<std::string> labels;
  std::vector<std::vector<detection::TrialOutcome>> outcomes;
  std::vector<double> ms_per_curve;
  for (const auto& m : methods) {
    const auto start = std::chrono::steady_clock::now();
    outcomes.push_back(detection::run_trials(curves, m, scenario.sample, *library));
    const std::chrono::duration<double, std::milli> took = std::chrono::steady_clock::now() - start;
    ms_per_curve.push_back(took.count() / static_cast<double>(curves.size()));
    labels.push_back(m.label);
  }

  if (!o.csv_file.empty())
    write_text(o.csv_file, detection::trials_csv(labels, outcomes));
  if (!o.svg_file.empty()) {
    write_text(o.svg_file,
               detection::trials_svg(scenario.name + ": " + std::to_string(curves.size()) +
                                         " curves, seeds " + std::to_string(o.first_seed) + "-" +
                                         std::to_string(o.first_seed + o.curves - 1),
                                     labels, outcomes));
  }

  json report = {{"scenario", detection::to_json(scenario)},
                 {"curves", curves.size()},
                 {"first_seed", o.first_seed},
                 {"methods", json::array()}};
  for (std::size_t m = 0; m < methods.size(); ++m) {
    json points = json::array();
    for (const auto& s : detection::summarise_trials(labels[m], outcomes[m])) {
      points.push_back({{"equivalence_point", s.endpoint_index + 1},
                        {"curves", s.curves},
                        {"found", s.found},
                        {"failed", s.failed},
                        {"bias_percent", s.bias_percent},
                        {"sd_percent", s.sd_percent},
                        {"rms_percent", s.rms_percent},
                        {"max_abs_percent", s.max_abs_percent},
                        {"mean_uncertainty_percent", s.mean_uncertainty_percent},
                        {"within_2u", s.coverage}});
    }
    report["methods"].push_back(
        {{"method", labels[m]}, {"ms_per_curve", ms_per_curve[m]}, {"points", points}});
  }
  if (o.json_output) {
    std::cout << report.dump(2) << "\n";
    return;
  }
  std::printf("scenario %s: %s\n", scenario.name.c_str(), scenario.description.c_str());
  std::printf(
      "%zu curves (seeds %lld-%lld), %zu points each; errors in %% of the true "
      "equivalence volume\n\n",
      curves.size(), o.first_seed, o.first_seed + o.curves - 1, curves.front().curve.size());
  std::printf("%-34s %5s %7s %9s %8s %8s %8s %9s %9s %9s\n", "method", "point", "found", "bias %",
              "sd %", "rms %", "max %", "mean u %", "within 2u", "ms/curve");
  for (std::size_t m = 0; m < methods.size(); ++m) {
    for (const auto& s : detection::summarise_trials(labels[m], outcomes[m])) {
      const std::string found = std::to_string(s.found) + "/" + std::to_string(s.curves);
      std::printf("%-34s %5zu %7s %9.4f %8.4f %8.4f %8.4f %9.4f %8.1f%% %9.3f\n", labels[m].c_str(),
                  s.endpoint_index + 1, found.c_str(), s.bias_percent, s.sd_percent, s.rms_percent,
                  s.max_abs_percent, s.mean_uncertainty_percent, 100.0 * s.coverage,
                  ms_per_curve[m]);
      if (s.failed > 0)
        std::printf("%-34s       %zu curves failed; see --csv for the messages' flags\n", "",
                    s.failed);
    }
  }
  if (!o.csv_file.empty())
    std::printf("\nevery outcome: %s\n", o.csv_file.c_str());
  if (!o.svg_file.empty())
    std::printf("picture: %s\n", o.svg_file.c_str());
}

}  // namespace

void add_trials_command(CLI::App& app) {
  auto o = std::make_shared<TrialsOptions>();
  CLI::App* cmd = app.add_subcommand(
      "trials",
      "For developers of endpoint methods: simulate seeded curves of a scenario with known\n"
      "equivalence volumes (the chemistry engine, noise, steps, electrode lag and drift,\n"
      "indicator, two metals), evaluate them with one or more methods and print each\n"
      "method's bias, scatter and uncertainty coverage.");
  cmd->add_option("--scenario", o->scenario, "built-in scenario (see --list)")
      ->capture_default_str();
  cmd->add_option("--scenario-file", o->scenario_file,
                  "scenario as JSON (start from --print-scenario); overrides --scenario");
  cmd->add_option("--curves", o->curves, "number of curves")->capture_default_str();
  cmd->add_option("--seed", o->first_seed, "seed of the first curve (the others follow)")
      ->capture_default_str();
  cmd->add_option("--method", o->methods,
                  "method to try, repeatable: NAME or NAME:OPTION=VALUE,... "
                  "(default: derivative, gran, model)");
  cmd->add_option("--csv", o->csv_file, "write every outcome to this CSV file");
  cmd->add_option("--svg", o->svg_file, "write a picture of the errors to this SVG file");
  cmd->add_option("--constants", o->constants_file,
                  "constants library file (default: the one shipped with veq)");
  cmd->add_option("--noise", o->noise, "override: noise of each reading, signal units");
  cmd->add_option("--step-ml", o->step_ml, "override: volume step, mL");
  cmd->add_option("--fine-step-ml", o->fine_step_ml,
                  "override: step near the expected endpoints, mL (0: none)");
  cmd->add_option("--lag-s", o->lag_s, "override: electrode response time, s");
  cmd->add_option("--reading-interval-s", o->reading_interval_s,
                  "override: time from dose to reading, s (0: no time column)");
  cmd->add_option("--drift-mv-per-min", o->drift_mv_per_min, "override: electrode drift");
  cmd->add_option("--spikes", o->spikes, "override: readings made wrong per curve");
  cmd->add_flag("--list", o->list, "list the built-in scenarios");
  cmd->add_flag("--print-scenario", o->print_scenario, "print the scenario as JSON and stop");
  cmd->add_flag("--json", o->json_output, "print the summary as JSON");
  cmd->callback([o] { run_trials_command(*o); });
}

}  // namespace veq::cli
