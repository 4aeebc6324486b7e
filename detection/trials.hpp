// Detection trials: seeded simulated titration curves with known equivalence
// volumes, evaluated with one or more endpoint methods, summarised as each
// method's bias, scatter and uncertainty coverage. A tool for judging a
// change to a method in seconds; the tests use the same simulator.
//
// Pure computation: seeded random numbers, no clocks, no files (the caller
// writes the table, the CSV and the SVG this header renders as text).
#pragma once

#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "chemistry/constants.hpp"
#include "chemistry/sample.hpp"
#include "common/result.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::detection {

/// How a simulated titration is made and recorded. The curves come from the
/// chemistry engine (chemistry::TitrationModel) for a "true" sample that
/// differs from the nominal one the methods are told about in the metal
/// amounts, the constants, and the electrode.
struct TrialScenario {
  std::string name;
  std::string description;
  /// The nominal sample, as the analyst describes it (and as the Gran and
  /// model methods receive it); its signal kind is what is recorded
  /// (potential, pM or absorbance).
  chemistry::SampleComposition sample;
  /// Each metal's true amount is the nominal one times 1 + U(-s, s) / 100,
  /// so that the equivalence volume falls anywhere between two readings and
  /// a method cannot lean on the nominal value. Default 5 %.
  double amount_spread_percent = 5.0;
  /// The true log10 of every metal-titrant complex constant is the
  /// library's plus U(-s, s): constants are known to a few tenths. Default 0.
  double constant_spread_log10 = 0.0;
  /// Volume step far from the equivalence points, mL.
  double step_ml = 0.1;
  /// > 0: steps shrink linearly to this within fine_zone_ml of each nominal
  /// equivalence volume, as a titrator doses near an expected endpoint, mL.
  double fine_step_ml = 0.0;
  double fine_zone_ml = 1.0;  ///< mL
  /// Last volume, mL; 0 = 1.3 times the last nominal equivalence volume.
  double end_volume_ml = 0.0;
  /// Gaussian noise of each reading, in the signal's unit (mV, pM,
  /// absorbance).
  double noise = 0.1;
  /// Electrode potential at unit metal activity, mV: E0 + U(-spread, spread).
  double electrode_zero_mv = 150.0;
  double electrode_zero_spread_mv = 20.0;
  /// Electrode slope in percent of the Nernst slope: slope + U(-spread, spread).
  double slope_percent = 100.0;
  double slope_spread_percent = 0.0;
  /// First-order response time of the electrode, s (0: instantaneous).
  double lag_s = 0.0;
  /// Steady drift of the electrode potential, mV per minute.
  double drift_mv_per_min = 0.0;
  /// > 0: the curve gets a time column; each reading is taken this long after
  /// its dose ends, s. The lag and the drift act only with a time column.
  double reading_interval_s = 0.0;
  /// Dosing rate, mL per minute: a dose takes step / rate.
  double dose_rate_ml_per_min = 5.0;
  /// Number of single readings made wrong by +-spike_size (signal units).
  int spikes = 0;
  double spike_size = 20.0;
};

/// Names of the built-in scenarios, e.g. "strong_break", "ammonia_copper".
std::span<const std::string_view> trial_scenario_names() noexcept;

/// A built-in scenario by name; the error lists the known names.
veq::Result<TrialScenario> builtin_trial_scenario(std::string_view name);

/// A scenario as JSON and back (every field spelt out; the sample as its
/// document), so that a scenario can be saved, edited and rerun.
nlohmann::json to_json(const TrialScenario& scenario);
veq::Result<TrialScenario> trial_scenario_from_json(const nlohmann::json& json);

/// One simulated curve and the truth about it.
struct TrialCurve {
  Curve curve;
  /// True equivalence volumes in mL, cumulative, in titration order (the
  /// metal with the largest log10(C K') first).
  std::vector<double> equivalence_ml;
  std::uint64_t seed = 0;
};

/// Simulates one curve of the scenario with the given seed. Errors: the
/// sample cannot be built with the library, or the solver fails.
veq::Result<TrialCurve> simulate_trial_curve(const TrialScenario& scenario, std::uint64_t seed,
                                             const chemistry::ConstantsLibrary& library);

/// One method to try: an endpoint method name (as evaluate() knows it) with
/// its options. The scenario's nominal sample is added as the "sample"
/// option of the methods that take one (gran, model) unless it is given.
struct TrialMethod {
  std::string label;  ///< shown in the table; the method name when empty
  std::string method;
  nlohmann::json options = nlohmann::json::object();
};

/// "derivative", "gran:slope_mv_per_decade=29.58" ...: a method name,
/// optionally followed by ':' and comma-separated NAME=VALUE options (values
/// read as JSON when they can be). The error names the bad part.
veq::Result<TrialMethod> parse_trial_method(std::string_view text);

/// One method on one curve.
struct TrialOutcome {
  std::uint64_t seed = 0;
  std::vector<double> equivalence_ml;  ///< truth
  std::vector<double> endpoint_ml;     ///< found, in order of volume
  std::vector<double> uncertainty_ml;  ///< standard uncertainty of each
  std::vector<QualityFlag> flags;      ///< whole-curve flags
  std::string error;                   ///< the method's error message, if it failed
};

/// Evaluates every curve with the method (through evaluate()), with the
/// library for the methods that use the chemistry.
std::vector<TrialOutcome> run_trials(std::span<const TrialCurve> curves, const TrialMethod& method,
                                     const chemistry::SampleComposition& nominal_sample,
                                     const chemistry::ConstantsLibrary& library);

/// Which endpoint of an outcome belongs to each true equivalence volume (its
/// index, or -1 when none does): in order when the method found as many
/// endpoints as there are equivalence points, else the closest pairs (a
/// method that sees only the second of two breaks is scored on that one).
std::vector<std::ptrdiff_t> match_endpoints(const TrialOutcome& outcome);

/// How one method did on one equivalence point over all curves. Errors are
/// endpoint minus truth, in percent of the true equivalence volume, the
/// endpoints matched to the truth by match_endpoints().
struct TrialSummary {
  std::string label;
  std::size_t endpoint_index = 0;         ///< 0 = first equivalence point
  std::size_t curves = 0;                 ///< curves evaluated
  std::size_t found = 0;                  ///< curves on which this endpoint was found
  std::size_t failed = 0;                 ///< curves on which the method returned an error
  double bias_percent = 0.0;              ///< mean error
  double sd_percent = 0.0;                ///< standard deviation of the errors
  double rms_percent = 0.0;               ///< root mean square error
  double max_abs_percent = 0.0;           ///< largest |error|
  double mean_uncertainty_percent = 0.0;  ///< mean reported standard uncertainty
  double coverage = 0.0;                  ///< share of found endpoints with |error| <= 2u
};

/// Summaries per equivalence point (as many as the scenario has).
std::vector<TrialSummary> summarise_trials(const std::string& label,
                                           std::span<const TrialOutcome> outcomes);

/// Every outcome as CSV rows: label, seed, endpoint index, true volume,
/// endpoint, uncertainty, error (mL and %), within 2u, flags; with a header.
std::string trials_csv(std::span<const std::string> labels,
                       std::span<const std::vector<TrialOutcome>> outcomes);

/// An SVG picture: per method a panel of each curve's error (% of the true
/// equivalence volume) with a bar of +-2u, red where the bar misses zero.
std::string trials_svg(const std::string& title, std::span<const std::string> labels,
                       std::span<const std::vector<TrialOutcome>> outcomes);

}  // namespace veq::detection
