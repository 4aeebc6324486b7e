// `veq demo`: the invented Tuesday rack of a water laboratory run unattended
// on simulated instruments in virtual time: conditioning, calibration,
// burette check, blank, titer, four samples (one by back-titration, one
// failing through an injected electrode fault) and check standards, stored
// in an SQLite file and printed beside the simulator's hidden truths.
#include <cmath>
#include <cstdio>
#include <iostream>
#include <memory>
#include <string>

#include <nlohmann/json.hpp>

#include "controller/cli/commands.hpp"
#include "controller/cli/demo_data.hpp"
#include "controller/cli/simulated_rack.hpp"
#include "controller/cli/stop_after_interruption.hpp"
#include "controller/lab_checks.hpp"
#include "controller/method/method_file.hpp"
#include "controller/method/stored_methods.hpp"
#include "controller/method/titer.hpp"
#include "controller/series/series_file.hpp"
#include "controller/series/series_runner.hpp"
#include "controller/store/sqlite_store.hpp"
#if VEQ_WITH_REPORT
#include "ui/report/pdf_report.hpp"
#include "ui/report/report_from_store.hpp"
#endif

namespace veq::cli {

namespace {

struct DemoOptions {
  std::string db = "veq-demo.sqlite";
  bool verbose = false;
  /// Print "point <run id> <index>" as each point is stored (for the crash
  /// test, which must know what was acknowledged before it kills veq).
  bool print_points = false;
  /// Leave the electrode fault out: every sample then gives a result.
  bool no_fault = false;
  /// Write the series' PDF report here (needs a veq built with Qt).
  std::string report;
};

/// Prints the series as it goes; with --verbose every message of every run.
class DemoObserver final : public series::SeriesObserver {
 public:
  DemoObserver(bool verbose, simulator::SimulatedBench& bench, drivers::Clock& clock,
               bool inject_fault, store::RunStore* print_points_from)
      : verbose_(verbose),
        bench_(bench),
        clock_(clock),
        inject_fault_(inject_fault),
        points_store_(print_points_from) {}

  // Called only after the store has committed the point (titration.cpp), so
  // a printed line is an acknowledged point. Flushed at once: a process
  // killed right after must not lose the line in its stdio buffer.
  void on_point(const store::PointRecord& point) override {
    if (points_store_ == nullptr)
      return;
    // The point does not carry its run: a run's first point looks up the
    // one run the store has running (runs are one at a time here).
    if (point.index == 0 || run_id_ == 0) {
      run_id_ = -1;
      if (auto runs = points_store_->list_runs(); runs) {
        for (const auto& r : *runs)
          if (r.status == store::RunStatus::running)
            run_id_ = r.id;
      }
    }
    std::printf("point %lld %lld\n", static_cast<long long>(run_id_),
                static_cast<long long>(point.index));
    std::fflush(stdout);
  }

  void on_entry(const std::string& kind, const std::string& label) override {
    std::printf("  %-15s %-26s", kind.c_str(), label.c_str());
    std::fflush(stdout);
    if (verbose_)
      std::printf("\n");
    if (inject_fault_ && label == "Millrace well") {
      // The injected fault: the electrode's reading freezes (a broken
      // cable inside the shaft) while this sample is measured, and comes
      // back for the next entry. Sample-specific: the series goes on.
      simulator::FaultPlan plan;
      plan.kind = simulator::FaultKind::dead;
      plan.after_s = clock_.now_s();
      bench_.set_fault("electrode", plan);
      faulted_ = true;
    }
  }
  void on_entry_end(const std::string&, const std::string& status,
                    const std::string& note) override {
    if (faulted_) {
      simulator::FaultPlan none;
      bench_.set_fault("electrode", none);
      faulted_ = false;
    }
    std::printf("%s%s\n", verbose_ ? "  => " : "", status.c_str());
    if (status != "done" && !note.empty()) {
      std::size_t start = 0;
      while (start < note.size()) {
        const std::size_t end = note.find('\n', start);
        std::printf("      %s\n", note.substr(start, end - start).c_str());
        if (end == std::string::npos)
          break;
        start = end + 1;
      }
    }
  }
  void on_message(const std::string& text) override {
    if (verbose_)
      std::printf("      %s\n", text.c_str());
  }

 private:
  bool verbose_;
  simulator::SimulatedBench& bench_;
  drivers::Clock& clock_;
  bool inject_fault_;
  bool faulted_ = false;
  store::RunStore* points_store_;
  std::int64_t run_id_ = 0;
};

double sum_mol(const simulator::PositionTruths& t) {
  double mol = 0.0;
  for (const auto& [metal, amount] : t.metals_mol)
    mol += amount;
  return mol;
}

int run_demo(const DemoOptions& options) {
  auto scenario = simulator::parse_scenario(demo::kScenario, "veq demo scenario");
  if (!scenario) {
    std::cerr << "veq demo: " << scenario.error().message << "\n";
    return 2;
  }
  auto opened = store::SqliteStore::open(options.db);
  if (!opened) {
    std::cerr << "veq demo: " << opened.error().message << "\n";
    return 2;
  }
  auto& store = **opened;

  // The simulated bench, in memory, in virtual time: built first, so that
  // after a crash the burettes are told to stop before anything else.
  SimulatedRack rack;
  if (auto built = rack.build(*scenario); !built) {
    std::cerr << "veq demo: " << built.error().message << "\n";
    return 2;
  }
  auto stopped = stop_burettes_after_interruption(*rack.instruments, store);
  if (!stopped) {
    std::cerr << "veq demo: " << stopped.error().message << "\n";
    return 2;
  }
  for (const auto& line : *stopped)
    std::printf("%s\n", line.c_str());
  std::fflush(stdout);

  // The lab's records before the rack starts: the methods, the titrants as
  // made up, and the calcium standard's titer from earlier in the week.
  for (const char* text : {demo::kCalciumMethod, demo::kNickelMethod}) {
    auto m = method::parse_method(text, "demo method");
    if (!m) {
      std::cerr << "veq demo: " << m.error().message << "\n";
      return 2;
    }
    if (auto saved = method::save_method(store, *m); !saved) {
      std::cerr << "veq demo: " << saved.error().message << "\n";
      return 2;
    }
  }
  for (const auto& [name, lot] :
       {std::pair<const char*, const char*>{"EDTA 0.01 mol/L", "E-26-118"},
        std::pair<const char*, const char*>{"calcium standard 0.01 mol/L", "CS-26-041"}}) {
    store::TitrantRecord t;
    t.name = name;
    t.nominal_conc_mol_per_l = 0.0100;
    t.lot = lot;
    t.prepared_utc = method::format_utc(
        std::chrono::time_point_cast<std::chrono::milliseconds>(std::chrono::system_clock::now()) -
        std::chrono::days{3});
    if (auto r = store.save_titrant(t); !r) {
      std::cerr << "veq demo: " << r.error().message << "\n";
      return 2;
    }
  }
  const auto start =
      std::chrono::time_point_cast<std::chrono::milliseconds>(std::chrono::system_clock::now());
  if (auto r = method::record_titer(store, "calcium standard 0.01 mol/L",
                                    {0.010002, 0.009998, 0.010001}, start - std::chrono::days{1});
      !r) {
    std::cerr << "veq demo: " << r.error().message << "\n";
    return 2;
  }

  auto& clock = rack.clock;
  auto& bench = *rack.bench;
  auto& instruments = *rack.instruments;

  auto parsed = series::parse_series(demo::kSeries, "demo series");
  if (!parsed) {
    std::cerr << "veq demo: " << parsed.error().message << "\n";
    return 2;
  }
  std::printf("veq demo: %s\n", scenario->name.c_str());
  std::printf(
      "  simulated burettes, calcium electrode with pH input, reagent doser, sample changer,\n"
      "  balance and stirrer, in memory and in virtual time; data in %s\n\n",
      options.db.c_str());
  series::SeriesStores stores{store, store, store};
  series::SeriesOptions series_options;
  series_options.start_time = start;
  DemoObserver observer(options.verbose, bench, clock, !options.no_fault,
                        options.print_points ? &store : nullptr);
  auto outcome =
      series::run_series(*parsed, demo::kSeries, instruments, stores, series_options, &observer);

  // Results beside the hidden truths.
  const auto truths = bench.truths();
  const double true_titrant = truths.titrant_true_conc_mol_per_l;
  std::printf("\nseries %s after %.0f min of simulated time: %s\n",
              store::series_status_name(outcome.status), clock.now_s() / 60.0,
              outcome.reason.c_str());
  std::printf("\n%-26s %-9s %14s %-10s %14s %9s\n", "entry", "status", "found", "unit", "true",
              "found-true");
  auto row = [](const std::string& label, const std::string& status, std::optional<double> found,
                const std::string& unit, std::optional<double> truth) {
    std::printf("%-26s %-9s ", label.c_str(), status.c_str());
    if (found)
      std::printf("%14.6g %-10s ", *found, unit.c_str());
    else
      std::printf("%14s %-10s ", "-", unit.c_str());
    if (truth && found)
      std::printf("%14.6g %+8.2f %%\n", *truth, (*found - *truth) / *truth * 100.0);
    else if (truth)
      std::printf("%14.6g\n", *truth);
    else
      std::printf("\n");
  };
  double blank_ml = 0.0;
  double titer = 1.0;
  for (const auto& e : outcome.entries) {
    std::optional<double> truth;
    int first_position = 0;
    for (const auto& s : parsed->entries)
      if (e.label.rfind(s.id, 0) == 0 && !s.positions.empty())
        first_position = s.positions.front();
    switch (e.kind) {
      case series::EntryKind::calibration:
        // The scenario electrode: 98 % of the Nernst slope at 25 °C.
        truth = 0.98 * controller::nernst_slope_mv_per_decade(25.0, 2);
        break;
      case series::EntryKind::burette_check:
        truth = 10.0;
        break;
      case series::EntryKind::blank:
        truth = 2.0e-6 / true_titrant * 1000.0;
        if (e.mean)
          blank_ml = *e.mean;
        break;
      case series::EntryKind::titer:
        truth = true_titrant;
        if (e.mean)
          titer = *e.mean / 0.0100;
        break;
      case series::EntryKind::sample:
      case series::EntryKind::check_standard: {
        const auto t = bench.position_truths(first_position);
        const double mol_per_l = sum_mol(t) / 0.050;
        truth = e.unit == "mg/L" ? mol_per_l * 58.693 * 1000.0 : mol_per_l * 1000.0;
        break;
      }
      case series::EntryKind::conditioning:
        break;
    }
    row(e.label, e.status, e.kind == series::EntryKind::conditioning ? std::nullopt : e.mean,
        e.unit, truth);
  }
  // What titer and blank did: the calcium samples computed with the label
  // and no blank.
  std::printf(
      "\nWithout the titer (%.4f) and the blank (%.4f mL), the same endpoints would give:\n", titer,
      blank_ml);
  for (const auto& e : outcome.entries) {
    if (e.kind != series::EntryKind::sample || !e.mean || e.unit != "mmol/L")
      continue;
    double sum = 0.0;
    int n = 0;
    auto determinations = store.load_determinations(e.entry_id);
    if (!determinations)
      continue;
    for (const auto& d : *determinations) {
      if (!d.counted)
        continue;
      const auto detail = nlohmann::json::parse(d.detail_json, nullptr, false);
      if (!detail.is_object() || !detail.contains("reacted_ml"))
        continue;
      sum += detail["reacted_ml"].get<double>() * 0.0100 / 50.0 * 1000.0;
      ++n;
    }
    if (n > 0)
      std::printf("  %-26s %10.4f mmol/L instead of %.4f\n", e.label.c_str(), sum / n, *e.mean);
  }
  std::printf("\nThe series, its runs and every point are in %s:\n", options.db.c_str());
  std::printf("  veq series list --db %s\n  veq series show --db %s --series %lld\n",
              options.db.c_str(), options.db.c_str(), static_cast<long long>(outcome.series_id));
  if (!outcome.burettes_stopped)
    std::printf("WARNING: a burette did not confirm its stop\n");
  if (!options.report.empty()) {
#if VEQ_WITH_REPORT
    report::ReportSources sources{store, &store, nullptr};
    auto data = report::stored_series_report_data(sources, store, outcome.series_id);
    if (!data) {
      std::cerr << "veq demo: cannot gather the report: " << data.error().message << "\n";
      return 2;
    }
    if (auto written = report::write_series_report(*data, options.report); !written) {
      std::cerr << "veq demo: " << written.error().message << "\n";
      return 2;
    }
    std::printf("The series' report is in %s (%zu titrations).\n", options.report.c_str(),
                data->runs.size());
#else
    std::cerr << "veq demo: this veq was built without Qt and cannot write PDF reports\n";
    return 2;
#endif
  }
  return outcome.status == store::SeriesStatus::completed ? 0 : 1;
}

}  // namespace

void add_demo_command(CLI::App& app) {
  auto options = std::make_shared<DemoOptions>();
  CLI::App* demo = app.add_subcommand(
      "demo",
      "Run an invented water laboratory's rack unattended on simulated instruments in virtual\n"
      "time: electrode conditioning, calibration, a gravimetric burette check, a blank, the\n"
      "titer of the EDTA, four samples in duplicate (one by back-titration, one failing through\n"
      "an injected electrode fault) and check standards. Everything is stored in an SQLite\n"
      "file, and the results are printed beside the simulator's hidden truths.");
  demo->add_option("--db", options->db, "SQLite file to store the series in (created if absent)")
      ->capture_default_str();
  demo->add_flag("--verbose", options->verbose, "print what every step and run does");
  demo->add_flag("--print-points", options->print_points,
                 "print \"point <run> <index>\" as each point is stored (for crash tests)");
  demo->add_flag("--no-fault", options->no_fault,
                 "leave out the injected electrode fault (every sample then gives a result)");
  demo->add_option("--report", options->report,
                   "write the series' PDF report to this file (docs/reports.md)");
  demo->callback([options] {
    const int code = run_demo(*options);
    if (code != 0)
      throw CLI::RuntimeError(code);
  });
}

}  // namespace veq::cli
