// Dosing strategies: how much titrant to add next, from the curve so far.
// Names are our own plain words (docs/titration.md explains each).
#pragma once

#include <memory>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/result.hpp"
#include "detection/derivative.hpp"

namespace veq::controller {

/// Which strategy (stored in method settings: append-only values).
enum class DosingKind : int {
  fixed_increments = 1,        ///< the same volume every step
  adaptive_increments = 2,     ///< steps sized to keep the signal change per step near a target
  approach_preset_signal = 3,  ///< shrinking steps towards a preset signal, then hold it
  model_guided = 4,  ///< fit the predicted curve while titrating, crowd points at the endpoint
};
const char* dosing_kind_name(DosingKind kind);

/// Settings of every strategy; each uses its own part.
struct DosingPlan {
  DosingKind kind = DosingKind::fixed_increments;

  /// fixed_increments: volume of every dose (mL).
  double increment_ml = 0.05;

  /// adaptive_increments and model_guided: smallest and largest step (mL).
  /// 0.01 mL is two or three motor steps short of what a 10-20 mL burette
  /// delivers reproducibly; 1 mL keeps a flat start quick (each step costs a
  /// settling wait, which is long for metals that react slowly) and cannot
  /// leap a 1:1 break: before one the slope grows as 1/(Ve - V), so steps
  /// sized to the signal change land about a third of the way to it.
  double smallest_step_ml = 0.01;
  double largest_step_ml = 1.0;
  /// adaptive_increments: wanted signal change per step (signal units, mV).
  /// 4 mV puts ten to twenty points on a break of 100-200 mV.
  double target_signal_step = 4.0;
  /// adaptive_increments: a step may grow by at most this factor over the last
  /// one, so that a flat stretch just before a break is not leapt over.
  double largest_growth = 2.0;

  /// approach_preset_signal: the signal to reach (mV), how close counts as
  /// reached, and how long it must stay there (s).
  double preset_signal = 0.0;
  double preset_tolerance = 1.0;
  double hold_s = 30.0;

  /// model_guided: stop once the fitted endpoint's standard uncertainty is
  /// below this (mL) and `points_past_endpoint` points lie past it.
  double required_uncertainty_ml = 0.005;
  int points_past_endpoint = 6;
  /// model_guided: within this distance before the predicted endpoint (mL)
  /// the steps are sized to the signal change; before it they halve the way
  /// left. 0.3 mL puts points into the bend before a weak break (conditional
  /// log K near 6.5 at 0.02 mol/L), which the fitted curve needs for its
  /// constant; 0.15 mL left the model fit's scatter there 30 % larger
  /// (docs/titration.md, benchmark).
  double endpoint_zone_ml = 0.3;
};

nlohmann::json to_json(const DosingPlan& plan);
/// Reads a plan; unknown names and out-of-range values are errors naming the field.
Result<DosingPlan> dosing_plan_from_json(const nlohmann::json& json);

/// The curve measured so far, as a strategy sees it.
struct CurveSoFar {
  const std::vector<double>& volume_ml;
  const std::vector<double>& signal;
  double max_volume_ml;  ///< the method's maximum burette reading
  /// Run clock time of each point (s), or null; model-guided dosing passes it
  /// to an endpoint method that fits the electrode's lag and drift.
  const std::vector<double>* time_s = nullptr;
};

/// The endpoint method a run ends with (TitrationMethod::endpoint_method and
/// endpoint_options): a detection::evaluate() name and its options as JSON.
/// Model-guided dosing judges the endpoint while titrating with the same
/// method, so that it stops when the evaluation that gives the result knows
/// the endpoint well enough, not when another method does.
struct EndpointJudge {
  std::string method = "derivative";
  nlohmann::json options = nlohmann::json::object();
};

/// What to do next.
struct DoseDecision {
  double volume_ml = 0.0;  ///< volume of the next dose, mL (> 0 unless finished)
  bool finished = false;   ///< the strategy has what it needs: stop titrating
  std::string reason;      ///< why it finished
  /// approach_preset_signal: the volume at which the preset signal was held.
  double endpoint_ml = 0.0;
  /// With volume_ml == 0 and not finished: wait this long (s), then read again.
  double wait_s = 0.0;
};

/// A dosing strategy keeps what it learns between steps.
class DosingStrategy {
 public:
  virtual ~DosingStrategy() = default;
  /// The next dose after the points so far (at least one point).
  virtual DoseDecision next(const CurveSoFar& curve) = 0;
  /// True if the strategy ends the titration by itself (approach_preset_signal
  /// and model_guided); the others stop past the endpoint found by detection.
  virtual bool decides_its_own_end() const { return false; }
};

/// The strategy of a plan. model_guided needs the sample volume before
/// titrant (mL) for the dilution in its predicted curve shape; it sees the
/// break with the derivative method (`detection`) and judges the endpoint's
/// uncertainty with the run's final endpoint method (`judge`; when that
/// method fails on the curve so far, with the derivative method).
/// `endpoints`: the breaks the curve is expected to pass (two metals bound in
/// turn: 2); adaptive_increments keeps its small steps until the last of
/// them. Strategies that decide their own end know one endpoint only
/// (TitrationMethod::endpoint_count refuses more for them).
std::unique_ptr<DosingStrategy> make_dosing_strategy(
    const DosingPlan& plan, double sample_volume_ml,
    const detection::DerivativeOptions& detection = {}, const EndpointJudge& judge = {},
    int endpoints = 1);

}  // namespace veq::controller
