// Endpoints by fitting the chemistry engine's predicted titration curve to
// the whole measured curve (Levenberg-Marquardt): the equivalence volumes
// are parameters of the model, so every point informs them, not only the
// few around a break.
#pragma once

#include <optional>
#include <string_view>

#include <nlohmann/json.hpp>

#include "chemistry/constants.hpp"
#include "chemistry/sample.hpp"
#include "common/result.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::detection {

/// Which chemistry the fitted curve comes from.
enum class ModelLevel : int {
  /// one_to_one when the sample reduces to it (one metal, fixed pH, no
  /// auxiliary ligand, no indicator, no activity correction), else speciation.
  automatic = 0,
  /// The exact 1:1 closed form with a conditional constant
  /// (chemistry/one_to_one.hpp): about a thousand times faster; with an
  /// auxiliary ligand it holds the metal's side reaction at its value in the
  /// undiluted sample, which biases the fit as the plain Gran function is.
  one_to_one = 1,
  /// The general equilibrium solver at every point (chemistry::TitrationModel):
  /// auxiliary ligands at each point's dilution, indicators, two metals.
  speciation = 2,
};

/// "automatic", "one_to_one", "speciation".
const char* model_level_name(ModelLevel level) noexcept;
std::optional<ModelLevel> model_level_from_name(std::string_view name);

/// Tuning of the model fit; the reason for each default is beside it.
struct ModelFitOptions {
  /// The sample chemistry in the format of `veq predict` (docs/chemistry.md).
  /// Required. Fixed from it: sample volume (unless the curve has one),
  /// titrant concentration, pH, ligands, indicator; free: the equivalence
  /// volume of each metal (the metal amounts), the constants, the signal's
  /// scale. The metal concentrations are only starting values.
  std::optional<chemistry::SampleComposition> sample;
  ModelLevel level = ModelLevel::automatic;
  /// Fit each metal's constant with the titrant (the conditional constant at
  /// the one_to_one level, a shift of every metal-titrant constant of the
  /// library at the speciation level). Default on: tabulated constants are
  /// uncertain by a few tenths of a log unit, and the break's shape depends
  /// on them; fixed, a wrong constant pulls the equivalence volume.
  bool fit_constants = true;
  /// Electrode slope in mV per decade from a calibration; 0 (default) = fit
  /// it, starting from the Nernst slope, because the whole curve determines
  /// it well.
  double slope_mv_per_decade = 0.0;
  /// With a time column, fit a first-order response time of the sensor: each
  /// reading approaches the equilibrium signal after its dose with
  /// exp(-t / lag). Default on: a slow electrode read before it has settled
  /// shifts a derivative endpoint late by a good part of a step; the model
  /// fit removes that shift. A fitted lag that is negligible is dropped.
  bool fit_lag = true;
  /// With a time column, fit a steady drift of the signal with time (signal
  /// units per minute). Default on: an electrode drifting by a fraction of a
  /// mV per minute tilts both plateaus and, unmodelled, pulls the endpoint.
  bool fit_drift = true;
  /// Largest number of model evaluations of the Levenberg-Marquardt search.
  /// Default 200: fits from the usual starting values converge in 5-30.
  int max_evaluations = 200;
};

/// The options as JSON, every field spelt out (the sample as its document).
nlohmann::json to_json(const ModelFitOptions& options);

/// Options from JSON: missing fields keep their defaults ("sample" is
/// required before fitting, not here); an unknown field, a value of the
/// wrong type or out of range is an error naming the field.
veq::Result<ModelFitOptions> model_fit_options_from_json(const nlohmann::json& json);

/// Checks the ranges of the options; the error names the field.
veq::Result<void> validate(const ModelFitOptions& options);

/// Fits the predicted curve of the sample to the measured one by
/// Levenberg-Marquardt (Eigen's unsupported LevenbergMarquardt module, a
/// port of MINPACK's lmder: J. J. More, The Levenberg-Marquardt algorithm:
/// implementation and theory, Lecture Notes in Mathematics 630 (1978) 105)
/// with analytic derivatives: closed form at the one_to_one level, implicit
/// differentiation of the mass balances at the speciation level.
///
/// Signals: potential_mv (E = E0 + S log10[M], E0 and S free unless the
/// slope is given), p_metal (pM = -log10[M], nothing free), absorbance or
/// transmittance (absorbance from absorptivities that are fitted: of the
/// free and metal-bound indicator when the sample has one, else of the
/// metal, its chelate and the titrant at the one_to_one level). With a time
/// column, a first-order lag and a drift (options). Starting values come
/// from the steepest part of the curve, the sample's nominal amounts and a
/// short scan.
///
/// One endpoint per metal, at the cumulative equivalence volumes in the
/// order the titrant binds the metals. The standard uncertainty of each
/// comes from the covariance s^2 (J^T J)^-1 at the solution, s^2 the residual
/// variance, widened by (1 + r)/(1 - r) when the residuals of neighbouring
/// points correlate with coefficient r > 0 (an AR(1) correction: a
/// systematic misfit then counts as fewer independent points). The details
/// hold every parameter with its uncertainty and the residual statistics;
/// the diagnostics the fitted and equilibrium curves and the residuals.
///
/// Errors: no sample, a sample the library cannot build, a level the sample
/// does not fit (one_to_one with two metals), a signal kind the model
/// cannot describe. Throws std::invalid_argument only for options that fail
/// validate().
veq::Result<Evaluation> fit_titration_model(const Curve& curve, const ModelFitOptions& options,
                                            const chemistry::ConstantsLibrary& library);

/// The same with the constants library shipped with veq.
veq::Result<Evaluation> fit_titration_model(const Curve& curve, const ModelFitOptions& options);

}  // namespace veq::detection
