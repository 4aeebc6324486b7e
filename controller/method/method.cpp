#include "controller/method/method.hpp"

#include <type_traits>

namespace veq::method {

const char* indication_kind_name(IndicationKind kind) {
  switch (kind) {
    case IndicationKind::electrode:
      return "electrode";
    case IndicationKind::photometer:
      return "photometer";
  }
  return "unknown";
}

// The names of controller/results.hpp (result_unit_name); a test checks that
// the controller knows each of them.
std::vector<std::string_view> result_units() {
  return {"mol/L", "mmol/L", "mg/L", "% w/w", "mg/kg"};
}

const char* counted_from_name(CountedFrom from) {
  switch (from) {
    case CountedFrom::stage_start:
      return "stage start";
    case CountedFrom::previous_endpoint:
      return "previous endpoint";
    case CountedFrom::first_stage_start:
      return "first stage start";
  }
  return "unknown";
}

std::vector<std::string_view> counted_from_names() {
  return {"stage start", "previous endpoint", "first stage start"};
}

std::vector<ResultRule> result_rules(const Method& method) {
  std::vector<ResultRule> rules = {method.result};
  rules.insert(rules.end(), method.more_results.begin(), method.more_results.end());
  return rules;
}

std::vector<std::size_t> titration_stages(const std::vector<Step>& steps) {
  std::vector<std::size_t> stages;
  for (std::size_t i = 0; i < steps.size(); ++i)
    if (std::holds_alternative<TitrateStep>(steps[i]) ||
        std::holds_alternative<BackTitrateStep>(steps[i]))
      stages.push_back(i);
  return stages;
}

const char* step_kind_name(const Step& step) {
  return std::visit(
      [](const auto& s) -> const char* {
        using T = std::decay_t<decltype(s)>;
        if constexpr (std::is_same_v<T, AddReagentStep>)
          return "add reagent";
        else if constexpr (std::is_same_v<T, AdjustPhStep>)
          return "adjust ph";
        else if constexpr (std::is_same_v<T, WaitStep>)
          return "wait";
        else if constexpr (std::is_same_v<T, AddTitrantStep>)
          return "add titrant";
        else if constexpr (std::is_same_v<T, BackTitrateStep>)
          return "back titrate";
        else if constexpr (std::is_same_v<T, TitrateStep>)
          return "titrate";
        else if constexpr (std::is_same_v<T, EvaluateStep>)
          return "evaluate";
        else
          return "rinse";
      },
      step);
}

std::vector<std::string_view> step_kind_names() {
  return {"add reagent", "adjust ph",    "wait",     "add titrant",
          "titrate",     "back titrate", "evaluate", "rinse"};
}

// These mirror controller/dosing.hpp (dosing_kind_name and to_json(DosingPlan));
// the method library sits below the controller, so it keeps its own copy and a
// test checks that the controller accepts every one of them.
std::vector<std::string_view> dosing_strategy_names() {
  return {"fixed increments", "adaptive increments", "approach preset signal", "model guided"};
}

std::vector<std::string_view> dosing_option_names() {
  return {"increment_ml",         "smallest_step_ml", "largest_step_ml",
          "target_signal_step",   "largest_growth",   "preset_signal",
          "preset_tolerance",     "hold_s",           "required_uncertainty_ml",
          "points_past_endpoint", "endpoint_zone_ml"};
}

nlohmann::json dosing_plan_json(const TitrateStep& step) {
  nlohmann::json plan =
      step.dosing_options.is_object() ? step.dosing_options : nlohmann::json::object();
  plan["kind"] = step.dosing;
  return plan;
}

}  // namespace veq::method
