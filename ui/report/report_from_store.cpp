#include "ui/report/report_from_store.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <optional>
#include <utility>

#include <nlohmann/json.hpp>

#include "common/version.hpp"
#include "controller/audit/audit.hpp"
#include "controller/lab_checks.hpp"
#include "controller/results.hpp"
#include "controller/titration.hpp"
#include "ui/run_plot.hpp"

namespace veq::report {

namespace {

std::string fixed(double value, int decimals) {
  char text[64];
  std::snprintf(text, sizeof text, "%.*f", decimals, value);
  return text;
}

std::string join(const std::string& a, const std::string& b) {
  if (a.empty())
    return b;
  if (b.empty())
    return a;
  return a + "," + b;
}

/// The latest version of `name` that a run has used and that was stored no
/// later than `started_utc` (ISO 8601 UTC strings compare as text).
std::string method_version(store::MethodStore* methods, const store::RunRecord& run,
                           std::vector<std::string>& notes) {
  if (!methods)
    return "not read (no method store)";
  auto versions = methods->list_method_versions(run.run.method_name);
  const store::MethodVersionRecord* found = nullptr;
  if (versions) {
    for (const auto& v : *versions) {
      if (v.used && v.created_utc <= run.started_utc)
        found = &v;
    }
  }
  if (!found)
    return "not recorded (no stored version of '" + run.run.method_name + "' in use)";
  notes.push_back("Method version: the latest used version of '" + run.run.method_name +
                  "' stored before the run started (" + found->created_utc + ").");
  return std::to_string(found->version);
}

struct TiterUsed {
  std::string text;
  std::optional<double> relative_u;  ///< relative standard uncertainty of the mean
};

TiterUsed titer_used(store::MethodStore* methods, const store::RunRecord& run) {
  if (!methods)
    return {"not read (no method store)", std::nullopt};
  auto history = methods->titer_history(run.run.titrant_name);
  const store::TiterRecord* found = nullptr;
  if (history) {
    for (const auto& t : *history) {
      if (t.accepted && t.determined_utc <= run.started_utc)
        found = &t;
    }
  }
  if (!found) {
    return {"no accepted titer of '" + run.run.titrant_name + "' stored before the run",
            std::nullopt};
  }
  std::string text = fixed(found->conc_mol_per_l, 6) + " mol/L";
  if (auto titrant = methods->load_titrant(run.run.titrant_name);
      titrant && titrant->nominal_conc_mol_per_l > 0.0) {
    text = "titer " + fixed(found->conc_mol_per_l / titrant->nominal_conc_mol_per_l, 4) + " (" +
           text + ")";
  }
  const std::size_t n = found->determinations_mol_per_l.size();
  text += ", " + std::to_string(n) + " determinations, RSD " + fixed(found->rsd_percent, 2) +
          " %, determined " + found->determined_utc;
  if (!found->expires_utc.empty() && found->expires_utc < run.started_utc)
    text += ", EXPIRED " + found->expires_utc + " before the run";
  else if (!found->expires_utc.empty())
    text += ", valid until " + found->expires_utc;
  TiterUsed used{text, std::nullopt};
  // The standard uncertainty of a mean of n determinations: s / sqrt(n).
  if (n > 0)
    used.relative_u = found->rsd_percent / 100.0 / std::sqrt(static_cast<double>(n));
  return used;
}

std::string calibration_used(store::MethodStore* methods, const store::RunRecord& run) {
  if (!methods)
    return "not read (no method store)";
  auto history = methods->calibration_history(run.run.sensor);
  const store::CalibrationRecord* found = nullptr;
  if (history) {
    for (const auto& c : *history) {
      if (c.measured_utc <= run.started_utc)
        found = &c;
    }
  }
  if (!found)
    return "no calibration of '" + run.run.sensor + "' stored before the run";
  std::string text = "slope " + fixed(found->slope_mv_per_decade, 2) + " mV/decade, E0 " +
                     fixed(found->e0_mv, 1) + " mV at " + fixed(found->temperature_c, 1) + " °C, " +
                     (found->accepted ? "accepted" : "REFUSED") + ", measured " +
                     found->measured_utc;
  if (!found->expires_utc.empty() && found->expires_utc < run.started_utc)
    text += ", EXPIRED " + found->expires_utc + " before the run";
  return text;
}

std::optional<UncertaintyReport> budget(const RunReportData& d, const TiterUsed& titer,
                                        const ReportOptions& options,
                                        std::vector<std::string>& notes) {
  const ResultRow* result = nullptr;
  const ResultRow* endpoint = nullptr;
  for (const auto& r : d.results) {
    if (r.name == options.budget_result)
      result = &r;
    if (r.name == "endpoint_volume")
      endpoint = &r;
  }
  if (!result || !endpoint) {
    notes.push_back("No uncertainty budget: the run has no stored '" + options.budget_result +
                    "' and endpoint volume.");
    return std::nullopt;
  }
  if (!(d.sample_volume_ml > 0.0)) {
    notes.push_back("No uncertainty budget: the run was not measured on a sample volume.");
    return std::nullopt;
  }
  // The endpoint's own standard uncertainty: that of the used evaluation's
  // endpoint nearest the reported volume.
  double endpoint_u_ml = 0.0;
  double nearest = INFINITY;
  for (const auto& e : d.endpoints) {
    if (e.used_for_results && std::abs(e.volume_ml - endpoint->value) < nearest) {
      nearest = std::abs(e.volume_ml - endpoint->value);
      endpoint_u_ml = e.uncertainty_ml;
    }
  }
  auto limits = controller::limits_for_burette(controller::piston_burette_limits(),
                                               options.burette_nominal_ml);
  if (!limits) {
    notes.push_back("No uncertainty budget: " + limits.error().message);
    return std::nullopt;
  }
  const double tolerance_ml = limits->systematic_ul / 1000.0;
  const double titrant_rel =
      titer.relative_u.value_or(options.titrant_relative_percent_without_titer / 100.0);
  std::vector<controller::UncertaintyComponent> components = {
      {"titrant concentration", d.titrant_conc_mol_per_l, d.titrant_conc_mol_per_l * titrant_rel,
       titer.relative_u ? "titer: RSD / sqrt(n) of its determinations"
                        : "assumed " + fixed(options.titrant_relative_percent_without_titer, 2) +
                              " % (no accepted titer stored)",
       0.0, 0.0},
      {"net titrant volume", endpoint->value,
       controller::net_volume_uncertainty_ml(tolerance_ml, endpoint_u_ml, 0.0),
       "burette ±" + fixed(limits->systematic_ul, 0) + " µL/sqrt(3) (ISO 8655-3, " +
           fixed(options.burette_nominal_ml, 0) + " mL) with the endpoint's u " +
           fixed(endpoint_u_ml, 4) + " mL",
       0.0, 0.0},
      {"sample aliquot", d.sample_volume_ml, options.pipette_tolerance_ml / std::sqrt(3.0),
       "pipette ±" + fixed(options.pipette_tolerance_ml, 3) + " mL/sqrt(3)", 0.0, 0.0},
  };
  const char* units[] = {"mol/L", "mL", "mL"};
  auto b = controller::product_quotient_budget(result->value, components);
  if (!b) {
    notes.push_back("No uncertainty budget: " + b.error().message);
    return std::nullopt;
  }
  UncertaintyReport u;
  u.result_name = result->name;
  u.unit = result->unit;
  u.value = result->value;
  for (std::size_t i = 0; i < b->components.size(); ++i) {
    const auto& c = b->components[i];
    u.rows.push_back({c.name, c.value, units[i], c.standard_uncertainty,
                      100.0 * c.relative_uncertainty, c.share_percent, c.basis});
  }
  u.combined_standard = b->combined_standard;
  u.coverage_factor = b->coverage_factor;
  u.expanded = b->expanded;
  u.note =
      "Product and quotient of the inputs: relative uncertainties add in quadrature "
      "(JCGM 100:2008, 5.1.6). The burette size and the pipette tolerance are assumptions of "
      "this report (veq report --help), not records of the store.";
  return u;
}

}  // namespace

veq::Result<RunReportData> run_report_data(const ReportSources& sources, std::int64_t run_id,
                                           const ReportOptions& options) {
  auto run = sources.runs.load_run(run_id);
  if (!run)
    return run.error();
  auto evaluations = sources.runs.load_evaluations(run_id);
  if (!evaluations)
    return evaluations.error();
  auto results = sources.runs.load_results(run_id);
  if (!results)
    return results.error();
  auto events = sources.runs.load_events(run_id);
  if (!events)
    return events.error();
  auto plot = ui::build_run_plot(sources.runs, run_id);
  if (!plot)
    return plot.error();

  RunReportData d;
  d.run_id = run_id;
  d.sample_id = run->run.sample_id;
  d.series = run->run.series;
  d.status = store::run_status_name(run->status);
  d.end_reason = run->end_reason;
  d.started_utc = run->started_utc;
  d.finished_utc = run->finished_utc;
  d.method_name = run->run.method_name;
  d.method_version = method_version(sources.methods, *run, d.notes);
  d.titrant_name = run->run.titrant_name;
  d.titrant_conc_mol_per_l = run->run.titrant_conc_mol_per_l;
  const TiterUsed titer = titer_used(sources.methods, *run);
  d.titer = titer.text;
  d.calibration = calibration_used(sources.methods, *run);
  d.sample_volume_ml = run->run.sample_volume_ml;
  d.burette = run->run.burette;
  d.sensor = run->run.sensor;
  d.software_version = run->software_version;
  d.curve = {plot->curve.x_title, plot->curve.y_title, plot->curve.x, plot->curve.y};
  d.derivative = {plot->derivative.x_title,
                  plot->derivative.y_title.empty()
                      ? std::string()
                      : "first derivative (" + plot->derivative.y_title + ")",
                  plot->derivative.x, plot->derivative.y};
  if (!plot->note.empty())
    d.notes.push_back("Curve: " + plot->note);

  std::int64_t used_evaluation = results->empty() ? 0 : results->front().evaluation_id;
  std::string result_flags;
  for (const auto& e : *evaluations) {
    for (const auto& p : e.endpoints) {
      EndpointRow row{e.id,
                      e.method,
                      e.options_json,
                      p.volume_ml,
                      p.uncertainty_ml,
                      p.signal,
                      join(e.flags, p.flags),
                      e.id == used_evaluation};
      d.endpoints.push_back(std::move(row));
    }
    if (e.id == used_evaluation) {
      result_flags = e.flags;
      for (const auto& p : e.endpoints)
        result_flags = join(result_flags, p.flags);
    }
  }
  for (const auto& r : *results)
    d.results.push_back({r.name, r.value, r.unit, result_flags});

  for (const auto& e : *events) {
    d.history.push_back(
        fixed(e.time_s, 1) + " s  " +
        controller::run_state_name(static_cast<controller::RunState>(e.from_state)) + " -> " +
        controller::run_state_name(static_cast<controller::RunState>(e.to_state)) +
        (e.reason.empty() ? "" : "  (" + e.reason + ")"));
  }

  if (sources.audit) {
    auto& trail = *sources.audit;
    if (auto v = trail.verify(); !v) {
      d.audit.push_back("audit trail not checked: " + v.error().message);
    } else if (v->intact) {
      d.audit.push_back("audit trail intact: " + std::to_string(v->records) +
                        " records, chain and keyed head checked");
    } else {
      d.audit.push_back("audit trail BROKEN at record " +
                        std::to_string(v->first_bad_sequence.value_or(0)) + ": " + v->problem);
    }
    const std::string subject = "run " + std::to_string(run_id);
    if (auto records = trail.records()) {
      for (const auto& r : *records) {
        if (r.subject != subject && r.subject.rfind(subject + " ", 0) != 0)
          continue;
        std::string line =
            "#" + std::to_string(r.sequence) + " " + r.at_utc + " " + r.user + ": " + r.action;
        if (!r.old_value.empty() || !r.new_value.empty())
          line += " " + r.old_value + " -> " + r.new_value;
        if (!r.reason.empty())
          line += " (" + r.reason + ")";
        d.audit.push_back(line);
      }
    }
    if (auto choice = trail.evaluation_choice(run_id); choice && *choice) {
      d.audit.push_back("results use evaluation " + std::to_string((*choice)->evaluation_id) +
                        ", chosen by " + (*choice)->user + " at " + (*choice)->chosen_utc + ": " +
                        (*choice)->reason);
      if ((*choice)->evaluation_id != used_evaluation && used_evaluation != 0) {
        d.notes.push_back("The stored results come from evaluation " +
                          std::to_string(used_evaluation) + ", not the chosen evaluation " +
                          std::to_string((*choice)->evaluation_id) + ".");
      }
    }
    if (auto signs = trail.sign_offs(run_id); signs && !signs->empty()) {
      const auto& s = signs->back();
      d.signature = {true, s.reviewer, s.meaning, s.signed_utc};
    }
  } else {
    d.audit.push_back("audit trail not read (no audit key for this store)");
  }

  d.uncertainty = budget(d, titer, options, d.notes);
  d.generated_utc = controller::audit::now_utc();
  d.report_software = kVersion;
  return d;
}

veq::Result<SeriesReportData> series_report_data(const ReportSources& sources,
                                                 const std::string& series,
                                                 const ReportOptions& options) {
  auto runs = sources.runs.list_runs();
  if (!runs)
    return runs.error();
  SeriesReportData s;
  s.series_name = series;
  std::vector<std::string> order;
  std::map<std::string, std::vector<const RunReportData*>> by_sample;
  for (const auto& r : *runs) {
    if (r.run.series != series)
      continue;
    auto d = run_report_data(sources, r.id, options);
    if (!d)
      return d.error();
    s.runs.push_back(std::move(*d));
  }
  if (s.runs.empty())
    return make_error(ErrorKind::not_found, "no run of series '" + series + "' in the store");
  std::sort(s.runs.begin(), s.runs.end(),
            [](const RunReportData& a, const RunReportData& b) { return a.run_id < b.run_id; });
  for (const auto& d : s.runs) {
    if (!by_sample.count(d.sample_id))
      order.push_back(d.sample_id);
    by_sample[d.sample_id].push_back(&d);
  }
  const RunReportData& first = s.runs.front();
  s.method_name = first.method_name;
  s.method_version = first.method_version;
  s.titrant_name = first.titrant_name;
  s.titrant_conc_mol_per_l = first.titrant_conc_mol_per_l;
  s.titer = first.titer;
  s.blank = "none recorded in the store";
  s.started_utc = first.started_utc;
  s.finished_utc = s.runs.back().finished_utc;
  for (const auto& d : s.runs) {
    if (d.method_name != s.method_name || d.method_version != s.method_version)
      s.notes.push_back("Run " + std::to_string(d.run_id) + " used method " + d.method_name +
                        " version " + d.method_version + ".");
    if (d.titrant_conc_mol_per_l != s.titrant_conc_mol_per_l)
      s.notes.push_back("Run " + std::to_string(d.run_id) + " used " + d.titrant_name + " " +
                        fixed(d.titrant_conc_mol_per_l, 6) + " mol/L.");
  }
  for (const auto& sample : order) {
    std::vector<std::int64_t> ids;
    std::vector<double> values;
    std::string unit, flags;
    for (const RunReportData* d : by_sample[sample]) {
      const ResultRow* value = nullptr;
      for (const auto& r : d->results) {
        if (r.name == options.series_result)
          value = &r;
      }
      if (!value) {
        s.flagged.push_back("run " + std::to_string(d->run_id) + " (" + sample + "): " + d->status +
                            (d->end_reason.empty() ? "" : ", " + d->end_reason) + "; no result");
        continue;
      }
      if (!value->flags.empty()) {
        s.flagged.push_back("run " + std::to_string(d->run_id) + " (" + sample +
                            "): " + value->name + " " + fixed(value->value, 4) + " " + value->unit +
                            ", flags " + value->flags);
        flags = join(flags, value->flags);
      }
      ids.push_back(d->run_id);
      values.push_back(value->value);
      unit = value->unit;
    }
    if (values.empty())
      continue;
    auto row =
        make_replicate_row(sample, "sample", options.series_result, unit, ids, values, flags);
    if (!row)
      return row.error();
    s.samples.push_back(std::move(*row));
  }
  s.notes.push_back(
      "Filled from the store: every run of the series is a sample replicate; check standards, "
      "blanks and titers are not told apart in the store yet.");
  s.generated_utc = controller::audit::now_utc();
  s.report_software = kVersion;
  return s;
}

}  // namespace veq::report

namespace veq::report {

veq::Result<SeriesReportData> stored_series_report_data(const ReportSources& sources,
                                                        store::SeriesStore& series,
                                                        std::int64_t series_id,
                                                        const ReportOptions& options) {
  auto record = series.load_series(series_id);
  if (!record)
    return record.error();
  auto entries = series.load_entries(series_id);
  if (!entries)
    return entries.error();
  SeriesReportData s;
  s.series_name = record->name;
  s.started_utc = record->started_utc;
  s.finished_utc = record->finished_utc;
  s.notes.push_back("Series " + std::string(store::series_status_name(record->status)) + ": " +
                    record->reason + ".");
  std::vector<std::int64_t> run_ids;
  for (const auto& e : *entries) {
    auto determinations = series.load_determinations(e.id);
    auto results = series.load_entry_results(e.id);
    if (!determinations)
      return determinations.error();
    if (!results)
      return results.error();
    if (s.method_name.empty() && !e.method_name.empty() && e.kind == "sample") {
      s.method_name = e.method_name;
      s.method_version = std::to_string(e.method_version);
    } else if (!e.method_name.empty() && e.kind == "sample" &&
               (e.method_name != s.method_name ||
                std::to_string(e.method_version) != s.method_version)) {
      s.notes.push_back(e.label + ": method " + e.method_name + ", version " +
                        std::to_string(e.method_version) + ".");
    }
    std::vector<std::int64_t> ids;
    std::vector<double> values;
    for (const auto& d : *determinations) {
      if (d.run_id > 0)
        run_ids.push_back(d.run_id);
      if (d.second_run_id > 0)
        run_ids.push_back(d.second_run_id);
      if (d.counted && !d.unit.empty()) {
        ids.push_back(d.second_run_id > 0 ? d.second_run_id : d.run_id);
        values.push_back(d.value);
      }
    }
    if (e.status != "done")
      s.flagged.push_back(e.kind + " '" + e.label + "': " + e.status +
                          (e.note.empty() ? "" : " (" + e.note + ")"));
    if (results->empty())
      continue;
    const auto& r = results->front();
    if (e.kind == "blank")
      s.blank =
          fixed(r.value, 4) + " mL, mean of " + std::to_string(r.count) + " (" + e.label + ")";
    if (e.kind == "titer")
      s.titer = fixed(r.value, 6) + " mol/L, mean of " + std::to_string(r.count) +
                " determinations, RSD " + fixed(r.rsd_percent, 3) + " %";
    if (e.kind == "check standard") {
      const auto detail = nlohmann::json::parse(r.detail_json, nullptr, false);
      if (detail.is_object() && detail.contains("expected")) {
        auto row = make_check_standard_row(e.label, ids.empty() ? 0 : ids.front(), r.unit,
                                           detail["expected"].get<double>(), r.value,
                                           detail["tolerance_percent"].get<double>());
        if (row)
          s.check_standards.push_back(std::move(*row));
      }
    }
    if (values.empty() || e.kind == "calibration" || e.kind == "burette check")
      continue;
    auto row = make_replicate_row(e.label, e.kind, r.name, r.unit, ids, values, r.flags);
    if (!row)
      return row.error();
    s.samples.push_back(std::move(*row));
  }
  if (s.blank.empty())
    s.blank = "none in this series";
  if (s.titer.empty())
    s.titer = "determined before this series (see each run)";
  for (std::int64_t id : run_ids) {
    auto d = run_report_data(sources, id, options);
    if (!d)
      return d.error();
    s.runs.push_back(std::move(*d));
  }
  if (!s.runs.empty()) {
    s.titrant_name = s.runs.front().titrant_name;
    s.titrant_conc_mol_per_l = s.runs.front().titrant_conc_mol_per_l;
  }
  s.generated_utc = controller::audit::now_utc();
  s.report_software = kVersion;
  return s;
}

}  // namespace veq::report
