// Endpoints at the steepest points of a titration curve, from its first
// derivative computed on the real (possibly uneven) volumes.
#pragma once

#include <nlohmann/json.hpp>

#include "common/result.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::detection {

/// Tuning of the derivative method. Every default is chosen for potentiometric
/// complexometric curves recorded with 0.02-0.2 mL steps; the reason is given
/// beside each.
struct DerivativeOptions {
  /// Points in each local quadratic least-squares fit that gives dSignal/dV
  /// (odd, >= 3). Default 5: the fewest that average noise while still
  /// resolving a break that falls between two volume steps; with 5 the
  /// interpolated endpoint had the smallest scatter on sharp simulated breaks
  /// (3 is noisier, 7 smears neighbouring endpoints together).
  int window_points = 5;
  /// Smallest signal change across a break for it to be reported, in the
  /// curve's signal unit; 0 = default_min_break_height() for the curve's kind.
  /// Noise and spikes make small local maxima of |dSignal/dV| everywhere; a
  /// real endpoint moves the signal by far more than the noise.
  double min_break_height = 0.0;
  /// Replace single-point spikes (a point beyond both neighbours by much more
  /// than the noise) by the mean of their neighbours first. Default on: one
  /// bad reading next to a break would otherwise move the endpoint.
  bool remove_spikes = true;
  /// A point is a spike when it stands out beyond both neighbours by more than
  /// this many noise standard deviations (and by more than half the minimum
  /// break height and twice the difference of its neighbours). Default 8: far
  /// beyond Gaussian noise (a false alarm about once in 10^15 points).
  double spike_threshold_sigma = 8.0;
  /// A break counts as complete once |dSignal/dV| on both sides of its maximum
  /// has fallen below this fraction of the maximum. Default 0.5: past half
  /// height the maximum is bracketed, so the endpoint will not move much as
  /// more points arrive; a curve still being recorded gets no endpoint before.
  double completion_fraction = 0.5;
  /// Points wanted past an endpoint before it is reported without the
  /// few_points_after_endpoint flag. Default 5: the local fits around the
  /// endpoint then no longer reach the end of the curve (common practice is
  /// to titrate a few steps past the break).
  int min_points_after_endpoint = 5;
  /// For a break much sharper than the volume steps (more than half of the
  /// signal change over the five steps around it falls into one step), place
  /// the endpoint inside that step from the signal changes of the steps on
  /// either side, assuming the curve is point-symmetric with logarithmic
  /// flanks there (a Nernstian electrode and a 1:1 reaction, such as a metal
  /// titrated with EDTA, or a strong acid with a strong base). Default on:
  /// on simulated calcium-EDTA curves it cuts the scatter of such endpoints
  /// from about a tenth of a step to under a hundredth. Turn it off for
  /// curves with unequal flanks (reactions other than 1:1, electrodes of
  /// other slope on either side); the interpolated maximum of |dSignal/dV|
  /// is then kept, whose error is bounded by the step.
  bool refine_sharp_breaks = true;
};

/// Default minimum break height in the unit of `kind`, chosen to lie well
/// above electrode and photometer noise but below the breaks of usable
/// titrations: 20 mV; 0.5 pM or pH units; 0.02 absorbance; 2 % transmittance.
double default_min_break_height(SignalKind kind) noexcept;

/// The options as JSON, every field spelt out.
nlohmann::json to_json(const DerivativeOptions& options);

/// Options from JSON: missing fields keep their defaults; an unknown field, a
/// value of the wrong type or out of range is an error naming the field.
veq::Result<DerivativeOptions> derivative_options_from_json(const nlohmann::json& json);

/// Checks the ranges of the options; the error names the field.
veq::Result<void> validate(const DerivativeOptions& options);

/// Endpoints at the interpolated maxima of |dSignal/dV|.
///
/// dSignal/dV at every point is the slope of a least-squares quadratic over
/// `window_points` neighbouring points in real volume (a local polynomial,
/// Savitzky-Golay style, but valid for uneven steps; A. Savitzky and
/// M. J. E. Golay, Anal. Chem. 36 (1964) 1627). Each local maximum of
/// |dSignal/dV| whose break (the signal change over the surrounding region
/// where |dSignal/dV| falls away monotonically) reaches the minimum break
/// height, and which is complete on both sides, gives one endpoint at the
/// vertex of the parabola through |dSignal/dV| at the maximum and its two
/// neighbours (or, for a break sharper than the steps, at the position the
/// flanks give; see DerivativeOptions::refine_sharp_breaks). The standard uncertainty combines the
/// noise (estimated from the curve itself and propagated through the fits) with the sampling error
/// of the volume steps.
///
/// Safe on curves still being recorded: no endpoint, and the flag
/// break_incomplete, until a break is complete. Throws std::invalid_argument
/// only for options that fail validate() (a programming error; options from
/// users go through derivative_options_from_json()).
Evaluation find_endpoints_by_derivative(const Curve& curve, const DerivativeOptions& options = {});

}  // namespace veq::detection
