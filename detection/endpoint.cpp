#include "detection/endpoint.hpp"

#include <algorithm>

namespace veq::detection {

const char* quality_flag_name(QualityFlag flag) noexcept {
  switch (flag) {
    case QualityFlag::few_points_after_endpoint:
      return "few_points_after_endpoint";
    case QualityFlag::small_break:
      return "small_break";
    case QualityFlag::near_curve_end:
      return "near_curve_end";
    case QualityFlag::poor_linearity:
      return "poor_linearity";
    case QualityFlag::no_endpoint:
      return "no_endpoint";
    case QualityFlag::break_incomplete:
      return "break_incomplete";
    case QualityFlag::spikes_removed:
      return "spikes_removed";
    case QualityFlag::coarse_steps:
      return "coarse_steps";
    case QualityFlag::several_crossings:
      return "several_crossings";
    case QualityFlag::few_points_in_segment:
      return "few_points_in_segment";
    case QualityFlag::weak_angle:
      return "weak_angle";
    case QualityFlag::signal_out_of_range:
      return "signal_out_of_range";
    case QualityFlag::dilution_not_corrected:
      return "dilution_not_corrected";
    case QualityFlag::sides_disagree:
      return "sides_disagree";
    case QualityFlag::metal_fraction_not_corrected:
      return "metal_fraction_not_corrected";
    case QualityFlag::poor_fit:
      return "poor_fit";
    case QualityFlag::fit_not_converged:
      return "fit_not_converged";
    case QualityFlag::parameter_at_limit:
      return "parameter_at_limit";
    case QualityFlag::unusual_slope:
      return "unusual_slope";
  }
  return "unknown";
}

bool has_flag(const std::vector<QualityFlag>& flags, QualityFlag flag) noexcept {
  return std::find(flags.begin(), flags.end(), flag) != flags.end();
}

namespace {
nlohmann::json flag_names(const std::vector<QualityFlag>& flags) {
  nlohmann::json names = nlohmann::json::array();
  for (QualityFlag flag : flags)
    names.push_back(quality_flag_name(flag));
  return names;
}
}  // namespace

nlohmann::json to_json(const Evaluation& evaluation) {
  nlohmann::json endpoints = nlohmann::json::array();
  for (const Endpoint& e : evaluation.endpoints) {
    endpoints.push_back({{"volume_ml", e.volume_ml},
                         {"uncertainty_ml", e.uncertainty_ml},
                         {"signal", e.signal},
                         {"steepness", e.steepness},
                         {"method", evaluation.method},
                         {"flags", flag_names(e.flags)}});
  }
  nlohmann::json series = nlohmann::json::array();
  for (const DiagnosticSeries& s : evaluation.diagnostics.series) {
    series.push_back({{"name", s.name}, {"y_unit", s.y_unit}, {"x_ml", s.x_ml}, {"y", s.y}});
  }
  nlohmann::json markers = nlohmann::json::array();
  for (const DiagnosticMarker& m : evaluation.diagnostics.markers) {
    markers.push_back({{"name", m.name},
                       {"axis", m.axis == MarkerAxis::volume ? "volume" : "signal"},
                       {"value", m.value}});
  }
  return {{"method", evaluation.method},
          {"options", evaluation.options},
          {"endpoints", std::move(endpoints)},
          {"flags", flag_names(evaluation.flags)},
          {"diagnostics", {{"series", std::move(series)}, {"markers", std::move(markers)}}},
          {"details", evaluation.details}};
}

}  // namespace veq::detection
