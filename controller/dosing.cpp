#include "controller/dosing.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <utility>

#include "chemistry/constants.hpp"

#include "detection/curve.hpp"
#include "detection/derivative.hpp"
#include "detection/evaluate.hpp"

namespace veq::controller {

namespace {

using nlohmann::json;

double last_step_ml(const CurveSoFar& c) {
  const auto n = c.volume_ml.size();
  return n >= 2 ? c.volume_ml[n - 1] - c.volume_ml[n - 2] : 0.0;
}

/// |dSignal/dV| over the last step, or 0 with fewer than two distinct volumes.
/// (A slope over two steps was tried: it smooths the noise of weak breaks but
/// lets the first step into a sharp break grow too large.)
double last_slope(const CurveSoFar& c) {
  const auto n = c.volume_ml.size();
  if (n < 2)
    return 0.0;
  const double dv = c.volume_ml[n - 1] - c.volume_ml[n - 2];
  if (dv <= 0.0)
    return 0.0;
  return std::abs(c.signal[n - 1] - c.signal[n - 2]) / dv;
}

class FixedIncrements final : public DosingStrategy {
 public:
  explicit FixedIncrements(const DosingPlan& p) : plan_(p) {}
  DoseDecision next(const CurveSoFar&) override { return {plan_.increment_ml, false, {}, 0.0}; }

 private:
  DosingPlan plan_;
};

/// Past a found endpoint, adaptive steps may move the signal by this many
/// times the target: on the logarithmic branch after a 1:1 break the steps
/// then grow by the growth limit each time instead of by about a third, while
/// a second, steep break still shrinks them. Points there only carry the
/// titration to its stop volume; the endpoint's evaluation has its own
/// points past it by then.
constexpr double kPastEndpointSignalFactor = 4.0;

/// The derivative method on the curve so far (volume and signal only).
detection::Evaluation derivative_so_far(const CurveSoFar& c, double sample_volume_ml,
                                        const detection::DerivativeOptions& options) {
  detection::CurveColumns cols;
  cols.volume_ml = c.volume_ml;
  cols.signal = c.signal;
  cols.sample_volume_ml = sample_volume_ml;
  auto curve = detection::Curve::from_columns(std::move(cols));
  if (!curve)
    return {};
  return detection::find_endpoints_by_derivative(*curve, options);
}

/// Steps sized so that the signal moves by about target_signal_step, from the
/// slope of the last step; bounded by the smallest and largest step and by the
/// growth limit. Once the derivative method (the run's options) reports the
/// last expected endpoint with enough points past it for its local fits, the
/// target is relaxed (kPastEndpointSignalFactor).
class AdaptiveIncrements final : public DosingStrategy {
 public:
  AdaptiveIncrements(const DosingPlan& p, double sample_volume_ml,
                     const detection::DerivativeOptions& detection, int endpoints)
      : plan_(p),
        sample_volume_ml_(sample_volume_ml),
        detection_(detection),
        endpoints_(static_cast<std::size_t>(std::max(1, endpoints))) {}
  DoseDecision next(const CurveSoFar& c) override {
    if (!past_endpoint_ && c.volume_ml.size() >= 5) {
      const auto ev = derivative_so_far(c, sample_volume_ml_, detection_);
      if (ev.endpoints.size() >= endpoints_) {
        const auto& ep = ev.endpoints.back();
        int past = 0;
        for (double x : c.volume_ml)
          past += x > ep.volume_ml ? 1 : 0;
        past_endpoint_ =
            past >= std::max(detection_.min_points_after_endpoint, detection_.window_points) &&
            !detection::has_flag(ep.flags, detection::QualityFlag::few_points_after_endpoint);
      }
    }
    const double target =
        plan_.target_signal_step * (past_endpoint_ ? kPastEndpointSignalFactor : 1.0);
    double step = plan_.largest_step_ml;
    const double slope = last_slope(c);
    if (slope > 0.0)
      step = target / slope;
    const double previous = last_step_ml(c);
    if (previous > 0.0)
      step = std::min(step, previous * plan_.largest_growth);
    if (c.volume_ml.size() < 2)
      step = plan_.smallest_step_ml * 5.0;  // a first, modest probe
    step = std::clamp(step, plan_.smallest_step_ml, plan_.largest_step_ml);
    return {step, false, {}, 0.0};
  }

 private:
  DosingPlan plan_;
  double sample_volume_ml_;
  detection::DerivativeOptions detection_;
  std::size_t endpoints_;
  bool past_endpoint_ = false;
};

/// Towards a preset signal in steps that shrink with the distance left, then
/// hold it: if the signal drifts back out of the tolerance (a slow reaction),
/// add the smallest step again; finished when it stayed for hold_s.
class ApproachPresetSignal final : public DosingStrategy {
 public:
  explicit ApproachPresetSignal(const DosingPlan& p) : plan_(p) {}
  bool decides_its_own_end() const override { return true; }
  DoseDecision next(const CurveSoFar& c) override {
    const double v = c.volume_ml.back();
    const double e = c.signal.back();
    const double distance = plan_.preset_signal - e;
    if (std::abs(distance) <= plan_.preset_tolerance) {
      // Reached: hold it, re-reading until it has stayed long enough.
      if (!holding_) {
        holding_ = true;
        held_at_ml_ = v;
        held_s_ = 0.0;
      }
      if (held_s_ >= plan_.hold_s) {
        return {0.0, true, "preset signal held for " + std::to_string(plan_.hold_s) + " s", v};
      }
      const double wait = std::min(plan_.hold_s / 3.0, plan_.hold_s - held_s_);
      held_s_ += wait;
      DoseDecision d{0.0, false, {}, 0.0};
      d.wait_s = wait;
      return d;
    }
    holding_ = false;
    // Always towards the preset value from where the titration started.
    if (direction_ == 0.0)
      direction_ = plan_.preset_signal >= c.signal.front() ? 1.0 : -1.0;
    if (distance * direction_ < 0.0) {
      // The last dose carried the signal past the preset value: the endpoint
      // is where the straight line between the last two points crosses it.
      const auto n = c.volume_ml.size();
      double at = v;
      if (n >= 2 && c.signal[n - 1] != c.signal[n - 2]) {
        const double f =
            (plan_.preset_signal - c.signal[n - 2]) / (c.signal[n - 1] - c.signal[n - 2]);
        at = c.volume_ml[n - 2] +
             std::clamp(f, 0.0, 1.0) * (c.volume_ml[n - 1] - c.volume_ml[n - 2]);
      }
      return {0.0, true, "signal went past the preset value; crossing interpolated", at};
    }
    double step = plan_.largest_step_ml;
    const double slope = last_slope(c);
    // Half the distance at the present slope: the steps shrink geometrically.
    if (slope > 0.0)
      step = 0.5 * std::abs(distance) / slope;
    const double previous = last_step_ml(c);
    if (previous > 0.0)
      step = std::min(step, previous * plan_.largest_growth);
    if (c.volume_ml.size() < 2)
      step = plan_.smallest_step_ml * 5.0;
    // At most half the largest step: a step that carries the signal across a
    // steep break cannot be taken back, and the crossing interpolated over it
    // is only as good as the step is short (with whole 1 mL steps the
    // benchmark's scatter doubled against 0.5 mL).
    step = std::clamp(step, plan_.smallest_step_ml,
                      std::max(plan_.smallest_step_ml, 0.5 * plan_.largest_step_ml));
    return {step, false, {}, 0.0};
  }

 private:
  DosingPlan plan_;
  bool holding_ = false;
  double held_at_ml_ = 0.0;
  double held_s_ = 0.0;
  double direction_ = 0.0;
};

/// Fits the metal-excess branch of the 1:1 curve, E = a + b log10((Ve - V) /
/// (V0 + V)), to the points before the break: linear in a and b for a given
/// equivalence volume Ve, so Ve is found by a one-dimensional search of the
/// residual. Returns Ve, or NaN when the points do not define it.
double predict_equivalence_ml(const std::vector<double>& v, const std::vector<double>& e,
                              double sample_volume_ml, double min_ve) {
  const std::size_t n = v.size();
  if (n < 4 || sample_volume_ml <= 0.0)
    return std::numeric_limits<double>::quiet_NaN();
  auto residual = [&](double ve, double* slope) {
    double sx = 0, sy = 0, sxx = 0, sxy = 0;
    for (std::size_t i = 0; i < n; ++i) {
      const double x = std::log10((ve - v[i]) / (sample_volume_ml + v[i]));
      sx += x;
      sy += e[i];
      sxx += x * x;
      sxy += x * e[i];
    }
    const double dn = static_cast<double>(n);
    const double den = dn * sxx - sx * sx;
    if (den <= 1e-300)
      return std::numeric_limits<double>::infinity();
    const double b = (dn * sxy - sx * sy) / den;
    const double a = (sy - b * sx) / dn;
    double r = 0;
    for (std::size_t i = 0; i < n; ++i) {
      const double x = std::log10((ve - v[i]) / (sample_volume_ml + v[i]));
      r += (e[i] - a - b * x) * (e[i] - a - b * x);
    }
    if (slope)
      *slope = b;
    return r;
  };
  // Scan Ve on a logarithmic grid above the last volume, then refine by golden section.
  const double lo = std::max(min_ve, v.back()) + 1e-6;
  double best = std::numeric_limits<double>::quiet_NaN();
  double best_r = std::numeric_limits<double>::infinity();
  double step = 1.05;
  int best_i = -1;
  std::vector<double> grid;
  for (double ve = lo + 0.01; ve < lo + 200.0; ve = lo + (ve - lo) * step)
    grid.push_back(ve);
  for (std::size_t i = 0; i < grid.size(); ++i) {
    const double r = residual(grid[i], nullptr);
    if (r < best_r) {
      best_r = r;
      best = grid[i];
      best_i = static_cast<int>(i);
    }
  }
  if (best_i <= 0 || best_i + 1 >= static_cast<int>(grid.size())) {
    return std::numeric_limits<double>::quiet_NaN();  // no interior minimum: not yet defined
  }
  double a = grid[static_cast<std::size_t>(best_i) - 1];
  double b = grid[static_cast<std::size_t>(best_i) + 1];
  const double g = (std::sqrt(5.0) - 1.0) / 2.0;
  for (int it = 0; it < 60; ++it) {
    const double c1 = b - g * (b - a);
    const double c2 = a + g * (b - a);
    if (residual(c1, nullptr) < residual(c2, nullptr)) {
      b = c2;
    } else {
      a = c1;
    }
  }
  best = 0.5 * (a + b);
  double slope = 0.0;
  residual(best, &slope);
  // A real metal-ion electrode curve falls or rises by tens of mV per decade;
  // a tiny fitted slope means the points only hold noise.
  if (std::abs(slope) < 5.0)
    return std::numeric_limits<double>::quiet_NaN();
  return best;
}

/// Model-guided dosing: predicts the equivalence volume from the curve before
/// the break, doses in large steps up to the edge of the endpoint zone, walks
/// through the zone in steps sized to the signal change, and stops once the
/// endpoint is known to the required uncertainty with enough points past it.
class ModelGuided final : public DosingStrategy {
 public:
  ModelGuided(const DosingPlan& p, double sample_volume_ml,
              const detection::DerivativeOptions& detection, EndpointJudge judge)
      : plan_(p),
        sample_volume_ml_(sample_volume_ml),
        detection_(detection),
        judge_(std::move(judge)) {
    if (judge_.method != "derivative") {
      // Parsed once: the judge may be asked after every point.
      if (auto library = chemistry::builtin_constants_library())
        library_ = std::move(*library);
    }
  }
  bool decides_its_own_end() const override { return true; }

  DoseDecision next(const CurveSoFar& c) override {
    const double v = c.volume_ml.back();
    // Has the break been seen? Ask the derivative method on the curve so far.
    if (c.volume_ml.size() >= 5) {
      detection::CurveColumns cols;
      cols.volume_ml = c.volume_ml;
      cols.signal = c.signal;
      if (c.time_s && c.time_s->size() == c.volume_ml.size())
        cols.time_s = *c.time_s;
      cols.sample_volume_ml = sample_volume_ml_;
      auto curve = detection::Curve::from_columns(std::move(cols));
      if (curve) {
        const auto ev = detection::find_endpoints_by_derivative(*curve, detection_);
        if (!ev.endpoints.empty()) {
          if (auto done = judged_by_method(*curve, c))
            return *done;
          if (!judged_) {
            const auto& ep = ev.endpoints.back();
            const int past = points_past(c, ep.volume_ml);
            // The final evaluation's local fits need a window of points past it too.
            if (past >= std::max(plan_.points_past_endpoint, detection_.window_points) &&
                ep.uncertainty_ml <= plan_.required_uncertainty_ml &&
                !detection::has_flag(ep.flags, detection::QualityFlag::few_points_after_endpoint)) {
              return finished(ep.volume_ml, ep.uncertainty_ml, past);
            }
          }
          // Past the break: steps sized to the signal change, as the adaptive
          // strategy does, so a broad weak break is still sampled evenly.
          return {adaptive_step(c), false, {}, 0.0};
        }
      }
    }
    // Before the break: predict where it will be from the shape so far.
    const double predicted = predict_equivalence_ml(c.volume_ml, c.signal, sample_volume_ml_, v);
    if (std::isfinite(predicted))
      predicted_ml_ = predicted;
    double step;
    if (predicted_ml_ > 0.0) {
      const double zone_start = predicted_ml_ - plan_.endpoint_zone_ml;
      // Up to the zone in large steps; inside it, steps sized to the signal
      // change.
      step = zone_start - v > plan_.smallest_step_ml
                 ? std::min(zone_start - v, plan_.largest_step_ml)
                 : std::min(adaptive_step(c), 2.0 * plan_.endpoint_zone_ml);
      // Never more than half the way to the predicted endpoint: the points
      // close in on it geometrically, so the bend before a broad (weak) break,
      // which tells the fitted curve its constant, gets points too, and a
      // prediction that is still off does not carry a step past the break.
      step = std::min(step, 0.5 * (predicted_ml_ - v));
    } else {
      // No prediction yet: modest steps, growing while the signal is flat.
      const double slope = last_slope(c);
      step = slope > 0.0 ? plan_.target_signal_step / slope : plan_.largest_step_ml / 2.0;
      const double previous = last_step_ml(c);
      if (previous > 0.0)
        step = std::min(step, previous * plan_.largest_growth);
      if (c.volume_ml.size() < 2)
        step = plan_.smallest_step_ml * 5.0;
    }
    step = std::clamp(step, plan_.smallest_step_ml, plan_.largest_step_ml);
    return {step, false, {}, 0.0};
  }

 private:
  static int points_past(const CurveSoFar& c, double endpoint_ml) {
    int past = 0;
    for (double x : c.volume_ml)
      past += x > endpoint_ml ? 1 : 0;
    return past;
  }

  DoseDecision finished(double endpoint_ml, double uncertainty_ml, int past) const {
    return {0.0, true,
            "endpoint at " + std::to_string(endpoint_ml) + " mL known to " +
                std::to_string(uncertainty_ml) + " mL with " + std::to_string(past) +
                " points past it",
            endpoint_ml};
  }

  /// With a final endpoint method other than the derivative: the decision
  /// when that method knows the endpoint well enough, else nothing. A fit on
  /// a curve that ends shortly past a broad break can settle in a wrong
  /// minimum, so the endpoint must also agree with the previous point's fit
  /// within the required uncertainty, and a fit flagged as poor, unconverged
  /// or at a parameter limit does not count. If the method fails outright,
  /// the derivative method judges instead (judged_ stays false).
  std::optional<DoseDecision> judged_by_method(const detection::Curve& curve, const CurveSoFar& c) {
    if (judge_.method == "derivative")
      return std::nullopt;
    auto ev = library_ ? detection::evaluate(curve, judge_.method, judge_.options, *library_)
                       : detection::evaluate(curve, judge_.method, judge_.options);
    if (!ev) {
      judged_ = false;
      return std::nullopt;
    }
    judged_ = true;
    const double previous = previous_judged_ml_;
    previous_judged_ml_ = std::numeric_limits<double>::quiet_NaN();
    using detection::QualityFlag;
    for (auto f : {QualityFlag::poor_fit, QualityFlag::fit_not_converged}) {
      if (detection::has_flag(ev->flags, f))
        return std::nullopt;
    }
    if (ev->endpoints.empty())
      return std::nullopt;
    const auto& ep = ev->endpoints.back();
    for (auto f : {QualityFlag::parameter_at_limit, QualityFlag::near_curve_end}) {
      if (detection::has_flag(ep.flags, f))
        return std::nullopt;
    }
    previous_judged_ml_ = ep.volume_ml;
    const int past = points_past(c, ep.volume_ml);
    if (past >= plan_.points_past_endpoint && ep.uncertainty_ml <= plan_.required_uncertainty_ml &&
        std::abs(ep.volume_ml - previous) <= plan_.required_uncertainty_ml) {
      return finished(ep.volume_ml, ep.uncertainty_ml, past);
    }
    return std::nullopt;
  }

  double adaptive_step(const CurveSoFar& c) const {
    const double slope = last_slope(c);
    double step = slope > 0.0 ? plan_.target_signal_step / slope : plan_.largest_step_ml;
    const double previous = last_step_ml(c);
    if (previous > 0.0)
      step = std::min(step, previous * plan_.largest_growth);
    return std::clamp(step, plan_.smallest_step_ml, plan_.largest_step_ml);
  }

  DosingPlan plan_;
  double sample_volume_ml_;
  detection::DerivativeOptions detection_;
  EndpointJudge judge_;
  std::optional<chemistry::ConstantsLibrary> library_;
  double predicted_ml_ = 0.0;
  bool judged_ = false;  ///< the judge method evaluated the last curve
  double previous_judged_ml_ = std::numeric_limits<double>::quiet_NaN();
};

}  // namespace

const char* dosing_kind_name(DosingKind kind) {
  switch (kind) {
    case DosingKind::fixed_increments:
      return "fixed increments";
    case DosingKind::adaptive_increments:
      return "adaptive increments";
    case DosingKind::approach_preset_signal:
      return "approach preset signal";
    case DosingKind::model_guided:
      return "model guided";
  }
  return "unknown";
}

json to_json(const DosingPlan& p) {
  return {{"kind", dosing_kind_name(p.kind)},
          {"increment_ml", p.increment_ml},
          {"smallest_step_ml", p.smallest_step_ml},
          {"largest_step_ml", p.largest_step_ml},
          {"target_signal_step", p.target_signal_step},
          {"largest_growth", p.largest_growth},
          {"preset_signal", p.preset_signal},
          {"preset_tolerance", p.preset_tolerance},
          {"hold_s", p.hold_s},
          {"required_uncertainty_ml", p.required_uncertainty_ml},
          {"points_past_endpoint", p.points_past_endpoint},
          {"endpoint_zone_ml", p.endpoint_zone_ml}};
}

Result<DosingPlan> dosing_plan_from_json(const json& j) {
  if (!j.is_object())
    return make_error(ErrorKind::invalid_input, "dosing: must be an object");
  DosingPlan p;
  for (auto it = j.begin(); it != j.end(); ++it) {
    const std::string& key = it.key();
    const std::string where = "dosing." + key;
    if (key == "kind") {
      if (!it->is_string())
        return make_error(ErrorKind::invalid_input, where + " must be text");
      const auto name = it->get<std::string>();
      bool found = false;
      for (auto k : {DosingKind::fixed_increments, DosingKind::adaptive_increments,
                     DosingKind::approach_preset_signal, DosingKind::model_guided}) {
        if (name == dosing_kind_name(k)) {
          p.kind = k;
          found = true;
        }
      }
      if (!found) {
        return make_error(ErrorKind::invalid_input,
                          where + ": unknown strategy '" + name +
                              "' (fixed increments, adaptive increments, approach preset "
                              "signal, model guided)");
      }
      continue;
    }
    if (!it->is_number())
      return make_error(ErrorKind::invalid_input, where + " must be a number");
    const double v = it->get<double>();
    double* target = nullptr;
    bool positive = true;
    if (key == "increment_ml")
      target = &p.increment_ml;
    if (key == "smallest_step_ml")
      target = &p.smallest_step_ml;
    if (key == "largest_step_ml")
      target = &p.largest_step_ml;
    if (key == "target_signal_step")
      target = &p.target_signal_step;
    if (key == "largest_growth")
      target = &p.largest_growth;
    if (key == "preset_signal") {
      target = &p.preset_signal;
      positive = false;
    }
    if (key == "preset_tolerance")
      target = &p.preset_tolerance;
    if (key == "hold_s")
      target = &p.hold_s;
    if (key == "required_uncertainty_ml")
      target = &p.required_uncertainty_ml;
    if (key == "endpoint_zone_ml")
      target = &p.endpoint_zone_ml;
    if (key == "points_past_endpoint") {
      if (v < 1 || v > 100)
        return make_error(ErrorKind::invalid_input, where + " must be 1..100");
      p.points_past_endpoint = static_cast<int>(v);
      continue;
    }
    if (!target)
      return make_error(ErrorKind::invalid_input, where + ": unknown setting");
    if (!std::isfinite(v) || (positive && !(v > 0.0))) {
      return make_error(ErrorKind::invalid_input,
                        where + " must be a finite number" + (positive ? " > 0" : ""));
    }
    *target = v;
  }
  if (p.smallest_step_ml > p.largest_step_ml) {
    return make_error(ErrorKind::invalid_input,
                      "dosing.smallest_step_ml is larger than dosing.largest_step_ml");
  }
  return p;
}

std::unique_ptr<DosingStrategy> make_dosing_strategy(const DosingPlan& plan,
                                                     double sample_volume_ml,
                                                     const detection::DerivativeOptions& detection,
                                                     const EndpointJudge& judge, int endpoints) {
  switch (plan.kind) {
    case DosingKind::fixed_increments:
      return std::make_unique<FixedIncrements>(plan);
    case DosingKind::adaptive_increments:
      return std::make_unique<AdaptiveIncrements>(plan, sample_volume_ml, detection, endpoints);
    case DosingKind::approach_preset_signal:
      return std::make_unique<ApproachPresetSignal>(plan);
    case DosingKind::model_guided:
      return std::make_unique<ModelGuided>(plan, sample_volume_ml, detection, judge);
  }
  return std::make_unique<FixedIncrements>(plan);
}

}  // namespace veq::controller
