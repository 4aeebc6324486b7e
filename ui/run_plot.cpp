#include "ui/run_plot.hpp"

#include <cmath>
#include <cstdio>
#include <optional>

#include <nlohmann/json.hpp>

#include "detection/curve.hpp"
#include "detection/derivative.hpp"

namespace veq::ui {

namespace {

std::string fixed(double value, int decimals) {
  char text[64];
  std::snprintf(text, sizeof text, "%.*f", decimals, value);
  return text;
}

std::string signal_title(int kind) {
  switch (static_cast<detection::SignalKind>(kind)) {
    case detection::SignalKind::potential_mv:
      return "potential (mV)";
    case detection::SignalKind::p_metal:
      return "pM";
    case detection::SignalKind::ph:
      return "pH";
    case detection::SignalKind::absorbance:
      return "absorbance";
    case detection::SignalKind::transmittance:
      return "transmittance (%)";
  }
  return "signal";
}

/// The derivative options a run was evaluated with: those of its latest
/// stored derivative evaluation, else those of its method, else the defaults.
detection::DerivativeOptions options_for(const store::RunRecord& run,
                                         const std::vector<store::EvaluationRecord>& evaluations,
                                         std::string* note) {
  for (auto it = evaluations.rbegin(); it != evaluations.rend(); ++it) {
    if (it->method != "derivative")
      continue;
    const auto json = nlohmann::json::parse(it->options_json, nullptr, false);
    if (auto options = detection::derivative_options_from_json(json))
      return *options;
  }
  const auto method = nlohmann::json::parse(run.run.method_json, nullptr, false);
  if (method.is_object() && method.contains("detection") && method["detection"].is_object() &&
      method["detection"].contains("options")) {
    if (auto options = detection::derivative_options_from_json(method["detection"]["options"]))
      return *options;
  }
  *note += "derivative drawn with default options (none stored with the run). ";
  return {};
}

}  // namespace

std::string run_list_label(const store::RunRecord& run) {
  // "2026-12-02T01:48:22.123Z" -> "2026-12-02 01:48"
  std::string when = run.started_utc.substr(0, 16);
  if (when.size() > 10 && when[10] == 'T')
    when[10] = ' ';
  return std::to_string(run.id) + "  " + run.run.sample_id + "  " +
         store::run_status_name(run.status) + "  " + when;
}

Result<RunPlot> build_run_plot(store::RunStore& store, std::int64_t run_id) {
  auto run = store.load_run(run_id);
  if (!run)
    return run.error();
  auto points = store.load_points(run_id);
  if (!points)
    return points.error();
  auto evaluations = store.load_evaluations(run_id);
  if (!evaluations)
    return evaluations.error();
  auto results = store.load_results(run_id);
  if (!results)
    return results.error();

  RunPlot plot;
  plot.run_id = run_id;
  plot.title = "Run " + std::to_string(run_id) + ": " + run->run.sample_id;
  plot.curve.label = "measured";
  plot.curve.x_title = "titrant added (mL)";
  plot.curve.y_title = signal_title(run->run.signal_kind);
  for (const auto& p : *points) {
    plot.curve.x.push_back(p.volume_ml);
    plot.curve.y.push_back(p.signal);
  }

  std::string summary = std::string(store::run_status_name(run->status));
  if (!run->end_reason.empty())
    summary += " (" + run->end_reason + ")";
  summary += "; " + std::to_string(points->size()) + " points; " + run->run.titrant_name + " " +
             fixed(run->run.titrant_conc_mol_per_l, 4) + " mol/L; sample " +
             fixed(run->run.sample_volume_ml, 2) + " mL; method " + run->run.method_name;

  // The curve as the endpoint methods see it (validated, equal volumes merged).
  detection::CurveColumns columns;
  columns.volume_ml = plot.curve.x;
  columns.signal = plot.curve.y;
  columns.kind = static_cast<detection::SignalKind>(run->run.signal_kind);
  columns.sample_volume_ml = run->run.sample_volume_ml;
  auto curve = detection::Curve::from_columns(columns);
  std::optional<detection::Evaluation> evaluation;
  if (!curve) {
    plot.note += "no derivative: " + curve.error().message + ". ";
  } else {
    const auto options = options_for(*run, *evaluations, &plot.note);
    evaluation = detection::find_endpoints_by_derivative(*curve, options);
    for (const auto& series : evaluation->diagnostics.series) {
      if (series.name != "first_derivative")
        continue;
      plot.derivative.label = "first derivative";
      plot.derivative.x_title = plot.curve.x_title;
      // The legend names the series; the axis keeps to the unit so that it
      // fits beside a short chart.
      plot.derivative.y_title = series.y_unit;
      plot.derivative.x = series.x_ml;
      plot.derivative.y = series.y;
    }
  }

  const store::EvaluationRecord* stored = evaluations->empty() ? nullptr : &evaluations->back();
  if (stored && !stored->endpoints.empty()) {
    for (const auto& e : stored->endpoints) {
      plot.endpoints.push_back({"endpoint " + fixed(e.volume_ml, 3) + " mL", e.volume_ml});
      summary +=
          "; endpoint " + fixed(e.volume_ml, 3) + " mL (u = " + fixed(e.uncertainty_ml, 4) + " mL)";
    }
    plot.note += "endpoints from the stored evaluation (" + stored->method + ", " +
                 stored->created_utc + ").";
  } else if (evaluation && !evaluation->endpoints.empty()) {
    for (const auto& e : evaluation->endpoints) {
      plot.endpoints.push_back({"endpoint " + fixed(e.volume_ml, 3) + " mL", e.volume_ml});
      summary += "; endpoint " + fixed(e.volume_ml, 3) + " mL (recomputed)";
    }
    plot.note += "endpoints recomputed here: the run has no stored evaluation.";
  } else {
    plot.note += "no endpoint found.";
  }
  for (const auto& r : *results) {
    if (r.name == "metal_concentration")
      summary += "; metal " + fixed(r.value, 3) + " " + r.unit;
    else if (r.name == "metal_mass_concentration")
      summary += " = " + fixed(r.value, 1) + " " + r.unit;
  }
  plot.summary = summary;
  return plot;
}

std::optional<RoundRange> round_range(double lo, double hi) {
  const double raw_step = (hi - lo) / 6.0;
  if (!(raw_step > 0.0) || !std::isfinite(raw_step))
    return std::nullopt;
  const double decade = std::pow(10.0, std::floor(std::log10(raw_step)));
  double step = 10.0 * decade;
  for (double m : {1.0, 2.0, 5.0}) {
    if (m * decade >= raw_step) {
      step = m * decade;
      break;
    }
  }
  RoundRange r;
  r.step = step;
  r.lo = std::floor(lo / step + 1e-9) * step;
  r.hi = std::ceil(hi / step - 1e-9) * step;
  r.ticks = static_cast<int>(std::lround((r.hi - r.lo) / step)) + 1;
  return r;
}

}  // namespace veq::ui
