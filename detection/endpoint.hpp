// The result every endpoint method returns: endpoints with their standard
// uncertainty, quality flags, the options used, and the data a plot needs to
// show how the endpoints were found.
#pragma once

#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace veq::detection {

/// A warning attached to one endpoint or to a whole evaluation. Stored in
/// SQLite files that outlive the binary: the numbers are append-only, never
/// reuse or renumber one. docs/detection.md explains each flag.
enum class QualityFlag : int {
  /// Fewer points were recorded past the endpoint than the method wants
  /// (DerivativeOptions::min_points_after_endpoint); the estimate may still
  /// move as the curve grows.
  few_points_after_endpoint = 1,
  /// A candidate break was seen but its height is below the minimum break
  /// height, so it was not reported (whole-curve flag).
  small_break = 2,
  /// The endpoint lies so close to the first or last point that the local fits
  /// there had to lean to one side.
  near_curve_end = 3,
  /// A straight segment does not describe its points well (segments method).
  poor_linearity = 4,
  /// No endpoint was found (whole-curve flag).
  no_endpoint = 5,
  /// The curve ends while the signal is still changing steeply: a break has
  /// begun but is not yet complete (whole-curve flag; expected while a
  /// titration is still running).
  break_incomplete = 6,
  /// Single-point spikes were replaced by the mean of their neighbours before
  /// evaluation (whole-curve flag; the raw points are unchanged).
  spikes_removed = 7,
  /// The volume steps around the endpoint are coarse compared with the width of
  /// the break, so the sampling, not the noise, limits the uncertainty.
  coarse_steps = 8,
  /// The signal crosses the preset value more than once (crossing method); the
  /// first crossing is reported as the endpoint, every crossing is listed.
  several_crossings = 9,
  /// A straight segment has fewer points than asked for (segments method).
  few_points_in_segment = 10,
  /// The two straight segments are nearly parallel, so their intersection is
  /// poorly defined (segments method).
  weak_angle = 11,
  /// Some signal values cannot be used by the method (a transmittance of 0 %
  /// or less has no absorbance); those points were left out.
  signal_out_of_range = 12,
  /// The segments method could not correct for dilution because the curve's
  /// sample volume is unknown (whole-curve flag).
  dilution_not_corrected = 13,
  /// The Gran lines before and after the equivalence point cross zero at
  /// volumes that differ by more than three times their combined standard
  /// uncertainty (Gran method); the endpoint is their weighted mean and its
  /// uncertainty is widened by the Birge ratio.
  sides_disagree = 14,
  /// The sample holds an auxiliary ligand that binds the metal, but the Gran
  /// function before the equivalence point was not corrected for the metal
  /// fraction (no sample given, or the correction switched off): expect a
  /// bias of up to tens of percent.
  metal_fraction_not_corrected = 15,
  /// The fitted model leaves residuals well beyond the noise of the curve or
  /// with a systematic pattern (model fit): the chemistry or the electrode
  /// does not behave as described.
  poor_fit = 16,
  /// The model fit stopped before converging (iteration limit).
  fit_not_converged = 17,
  /// A fitted parameter ran into the limit of its allowed range (model fit,
  /// fitted electrode slope): the value reported is that limit.
  parameter_at_limit = 18,
  /// The electrode slope fitted from the curve lies outside 80-105 % of the
  /// Nernst slope: check the electrode (or give a calibrated slope).
  unusual_slope = 19,
};

/// A short, stable name ("few_points_after_endpoint", ...).
const char* quality_flag_name(QualityFlag flag) noexcept;

/// One endpoint found on a curve.
struct Endpoint {
  double volume_ml = 0.0;       ///< endpoint volume, mL of titrant
  double signal = 0.0;          ///< signal at the endpoint, in the curve's signal unit
  double uncertainty_ml = 0.0;  ///< standard uncertainty of volume_ml, mL
  /// |dSignal/dV| at the endpoint, signal units per mL. Derivative and
  /// crossing: the slope there (as seen by the local fit or the two bracketing
  /// points, so a break sharper than the volume steps shows as the steepness
  /// the steps allow). Segments: the change of slope between the two straight
  /// segments, in (dilution-corrected) absorbance per mL.
  double steepness = 0.0;
  std::vector<QualityFlag> flags;
};

/// A named line of (x, y) points for a plot. x is volume in mL unless the
/// series says otherwise.
struct DiagnosticSeries {
  std::string name;    ///< stable name, e.g. "first_derivative"
  std::string y_unit;  ///< unit of y, e.g. "mV/mL"
  std::vector<double> x_ml;
  std::vector<double> y;
};

/// Where a marker line is drawn.
enum class MarkerAxis : int {
  volume = 1,  ///< vertical line at a volume, mL
  signal = 2,  ///< horizontal line at a signal value
};

/// A straight marker line on a plot (an endpoint, a preset level).
struct DiagnosticMarker {
  std::string name;
  MarkerAxis axis = MarkerAxis::volume;
  double value = 0.0;
};

/// What a plot needs to show how an evaluation found its endpoints, besides
/// the curve itself.
struct Diagnostics {
  std::vector<DiagnosticSeries> series;
  std::vector<DiagnosticMarker> markers;
};

/// The result of evaluating one curve with one method.
struct Evaluation {
  std::string method;               ///< "derivative", "segments", "crossing", "gran", "model"
  nlohmann::json options;           ///< the options used, every field spelt out
  std::vector<Endpoint> endpoints;  ///< in order of increasing volume
  std::vector<QualityFlag> flags;   ///< whole-curve flags
  Diagnostics diagnostics;
  /// Values a method determines besides its endpoints, as a JSON object (the
  /// Gran method's linear ranges and electrode slope, the model fit's
  /// parameters with their standard uncertainties and its residual
  /// statistics); empty for methods that have none.
  nlohmann::json details = nlohmann::json::object();
};

/// True if `flags` holds `flag`.
bool has_flag(const std::vector<QualityFlag>& flags, QualityFlag flag) noexcept;

/// The evaluation as JSON: {"method", "options", "endpoints": [{"volume_ml",
/// "uncertainty_ml", "signal", "steepness", "method", "flags": [names]}],
/// "flags": [names], "diagnostics": {"series": [...], "markers": [...]},
/// "details": {...}}.
nlohmann::json to_json(const Evaluation& evaluation);

}  // namespace veq::detection
