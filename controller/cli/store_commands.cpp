// `veq runs` and `veq show`: what is stored, and one run with its points.
#include <cstdio>
#include <iostream>
#include <memory>
#include <nlohmann/json.hpp>
#include <string>

#include "controller/audit/audit.hpp"
#include "controller/cli/cli_support.hpp"
#include "controller/cli/commands.hpp"
#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::cli {

namespace {

struct StoreOptions {
  std::string db = store::default_database_path();
  std::int64_t run_id = 0;
  bool points = false;
  bool json = false;
};

void list_runs(const StoreOptions& o) {
  auto s = open_store_or_throw(o.db);
  auto runs = s->list_runs();
  if (!runs)
    throw CLI::Error("StoreError", runs.error().message, 2);
  if (o.json) {
    nlohmann::json out = nlohmann::json::array();
    for (const auto& r : *runs) {
      out.push_back({{"run", r.id},
                     {"sample_id", r.run.sample_id},
                     {"series", r.run.series},
                     {"status", store::run_status_name(r.status)},
                     {"points", r.point_count},
                     {"started_utc", r.started_utc},
                     {"end_reason", r.end_reason}});
    }
    std::cout << out.dump(2) << "\n";
    return;
  }
  std::printf("%5s  %-20s  %-10s  %-11s  %6s  %-24s  %s\n", "run", "sample", "series", "status",
              "points", "started (UTC)", "how it ended");
  for (const auto& r : *runs) {
    std::printf("%5lld  %-20s  %-10s  %-11s  %6lld  %-24s  %s\n", static_cast<long long>(r.id),
                r.run.sample_id.c_str(), r.run.series.c_str(), store::run_status_name(r.status),
                static_cast<long long>(r.point_count), r.started_utc.c_str(), r.end_reason.c_str());
  }
}

void show_run(const StoreOptions& o) {
  auto s = open_store_or_throw(o.db);
  auto run = s->load_run(o.run_id);
  if (!run)
    throw CLI::Error("StoreError", run.error().message, 2);
  auto points = s->load_points(o.run_id);
  auto evaluations = s->load_evaluations(o.run_id);
  auto results = s->load_results(o.run_id);
  if (!points || !evaluations || !results) {
    throw CLI::Error("StoreError", "cannot read run " + std::to_string(o.run_id), 2);
  }
  // The evaluation the results use: the one a reviewer chose (audit trail),
  // else the earliest evaluation with results (the one the run stored).
  std::int64_t in_use = 0;
  std::string chosen_by;
  for (const auto& r : *results)
    if (in_use == 0 || r.evaluation_id < in_use)
      in_use = r.evaluation_id;
  if (auto trail = store::AuditTrail::open(o.db, controller::audit::default_key_path(o.db).string(),
                                           false)) {
    if (auto choice = (*trail)->evaluation_choice(o.run_id); choice && *choice) {
      in_use = (*choice)->evaluation_id;
      chosen_by = (*choice)->user + " at " + (*choice)->chosen_utc + ": " + (*choice)->reason;
    }
  }
  if (o.json) {
    nlohmann::json out;
    out["run"] = run->id;
    out["evaluation_in_use"] = in_use;
    out["sample_id"] = run->run.sample_id;
    out["status"] = store::run_status_name(run->status);
    out["end_reason"] = run->end_reason;
    out["method"] = nlohmann::json::parse(run->run.method_json, nullptr, false);
    out["titrant_conc_mol_per_l"] = run->run.titrant_conc_mol_per_l;
    out["sample_volume_ml"] = run->run.sample_volume_ml;
    out["software_version"] = run->software_version;
    for (const auto& e : *evaluations) {
      nlohmann::json ev = {{"evaluation", e.id}, {"method", e.method}, {"flags", e.flags}};
      for (const auto& p : e.endpoints) {
        ev["endpoints"].push_back({{"volume_ml", p.volume_ml},
                                   {"uncertainty_ml", p.uncertainty_ml},
                                   {"signal", p.signal},
                                   {"steepness", p.steepness},
                                   {"flags", p.flags}});
      }
      out["evaluations"].push_back(ev);
    }
    for (const auto& r : *results) {
      out["results"].push_back({{"name", r.name},
                                {"value", r.value},
                                {"unit", r.unit},
                                {"evaluation", r.evaluation_id},
                                {"in_use", r.evaluation_id == in_use}});
    }
    if (o.points) {
      for (const auto& p : *points) {
        out["points"].push_back({{"time_s", p.time_s},
                                 {"volume_ml", p.volume_ml},
                                 {"signal", p.signal},
                                 {"temperature_c", p.temperature_c},
                                 {"drift_per_min", p.drift_per_min},
                                 {"settle_s", p.settle_s}});
      }
    }
    std::cout << out.dump(2) << "\n";
    return;
  }
  std::printf("run %lld  sample %s  %s  (%s)\n", static_cast<long long>(run->id),
              run->run.sample_id.c_str(), store::run_status_name(run->status),
              run->end_reason.c_str());
  std::printf("  method %s; titrant %s %.5f mol/L; sample %.3f mL; veq %s; started %s\n",
              run->run.method_name.c_str(), run->run.titrant_name.c_str(),
              run->run.titrant_conc_mol_per_l, run->run.sample_volume_ml,
              run->software_version.c_str(), run->started_utc.c_str());
  std::printf("  burette: %s\n  sensor:  %s\n", run->run.burette.c_str(), run->run.sensor.c_str());
  for (const auto& e : *evaluations) {
    std::printf("  evaluation %lld by %s%s%s\n", static_cast<long long>(e.id), e.method.c_str(),
                e.flags.empty() ? "" : ", flags: ", e.flags.c_str());
    for (const auto& p : e.endpoints) {
      std::printf("    endpoint %.4f mL +/- %.4f mL at %.2f, steepness %.1f per mL %s\n",
                  p.volume_ml, p.uncertainty_ml, p.signal, p.steepness, p.flags.c_str());
    }
  }
  if (!results->empty()) {
    std::printf("  results in use: those of evaluation %lld%s%s\n", static_cast<long long>(in_use),
                chosen_by.empty() ? " (as stored)" : ", chosen by ", chosen_by.c_str());
  }
  for (const auto& r : *results) {
    std::printf("  %-26s %12.5g %-7s (evaluation %lld%s)\n", r.name.c_str(), r.value,
                r.unit.c_str(), static_cast<long long>(r.evaluation_id),
                r.evaluation_id == in_use ? ", in use" : "");
  }
  std::printf("  %zu points\n", points->size());
  if (o.points) {
    std::printf("  %8s %10s %10s %8s %12s %8s\n", "time_s", "volume_ml", "signal", "temp_c",
                "drift/min", "settle_s");
    for (const auto& p : *points) {
      std::printf("  %8.1f %10.4f %10.3f %8.2f %12.3f %8.1f\n", p.time_s, p.volume_ml, p.signal,
                  p.temperature_c, p.drift_per_min, p.settle_s);
    }
  }
}

}  // namespace

void add_store_commands(CLI::App& app) {
  auto options = std::make_shared<StoreOptions>();
  CLI::App* runs = app.add_subcommand("runs", "List the runs stored in an SQLite file.");
  runs->add_option("--db", options->db, "SQLite file (default ./veq.sqlite or $VEQ_DB)")
      ->capture_default_str();
  runs->add_flag("--json", options->json, "print JSON instead of a table");
  runs->callback([options] { list_runs(*options); });

  CLI::App* show = app.add_subcommand(
      "show",
      "Show one stored run: method, evaluations, endpoints, results and optionally points.");
  show->add_option("--db", options->db, "SQLite file (default ./veq.sqlite or $VEQ_DB)")
      ->capture_default_str();
  show->add_option("--run", options->run_id, "run number (see veq runs)")->required();
  show->add_flag("--points", options->points, "also print every raw point");
  show->add_flag("--json", options->json, "print JSON");
  show->callback([options] { show_run(*options); });
}

}  // namespace veq::cli
