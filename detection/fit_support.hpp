// Helpers shared by the methods that use the sample chemistry (Gran, model
// fit): the Nernst slope, a rough location of the break, a one-dimensional
// minimiser, and the reading of a sample's chemistry for a curve.
#pragma once

#include <cstddef>
#include <functional>
#include <optional>
#include <span>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "chemistry/constants.hpp"
#include "chemistry/equilibrium.hpp"
#include "chemistry/prediction.hpp"
#include "chemistry/sample.hpp"
#include "common/result.hpp"
#include "detection/curve.hpp"

namespace veq::detection::fit_support {

/// Nernst slope in mV per decade for an ion of charge `charge` at
/// `temperature_c`: 1000 R T ln(10) / (z F) (R = 8.314462618 J/(mol K),
/// F = 96485.33212 C/mol, CODATA 2018): 59.16 / z mV at 25 degC.
double nernst_slope_mv(double temperature_c, int charge) noexcept;

/// Mean of the curve's temperature column, or `fallback_c` without one.
double curve_temperature_c(const Curve& curve, double fallback_c) noexcept;

/// Index of the steepest fall of `y` (y decreasing with volume through the
/// break), from central differences of a 3-point running median of y, so
/// that a single spike does not take the place of the break.
/// Returns nothing when the steepest fall lies at either end of the curve
/// (no break inside it).
/// `factor` multiplies y first (-1: the steepest rise).
std::optional<std::size_t> steepest_fall(std::span<const double> volume_ml,
                                         std::span<const double> y, double factor = 1.0);

/// Standard deviation of the signal noise, in signal units, from each
/// interior point's distance to the straight line through its neighbours
/// (scaled to one reading's noise, as local_fit::noise_sd does), taking the
/// median of the squared distances over 0.4549, the median of chi-square
/// with one degree of freedom: one pass and a selection, robust to a break
/// and to spikes (which are a few points) without iterating. 0 for fewer
/// than 3 points.
double noise_sd_median(std::span<const double> volume_ml, std::span<const double> signal);

/// Minimum of f on [lo, hi] by Brent's method (golden section with parabolic
/// steps; R. P. Brent, Algorithms for Minimization without Derivatives,
/// 1973, chapter 5), to an absolute tolerance `tolerance` in x.
struct Minimum {
  double x = 0.0;
  double value = 0.0;
  int evaluations = 0;
};
Minimum minimise(const std::function<double(double)>& f, double lo, double hi, double tolerance,
                 int max_evaluations = 60);

/// The sample's chemistry, as detection methods need it, for one curve.
struct SampleChemistry {
  chemistry::SampleComposition sample;  ///< with the curve's sample volume when it has one
  double sample_volume_ml = 0.0;        ///< V0 used
  std::size_t signal_metal = 0;         ///< index into sample.metals
  int metal_charge = 2;
  /// The metal's side reaction with something other than the titrant
  /// changes along the curve (an auxiliary ligand or indicator binds it, or
  /// pH follows the proton balance).
  bool metal_fraction_varies = false;
};

/// The "sample" option of an endpoint method: a sample document given as a
/// JSON object. The error says what is wrong with it (the caller names the
/// option).
veq::Result<chemistry::SampleComposition> sample_from_option(const nlohmann::json& value);

/// Reads the sample for a curve: takes the curve's sample volume when it has
/// one, checks the sample against the library. Errors name the problem.
veq::Result<SampleChemistry> read_sample(const chemistry::SampleComposition& sample,
                                         const Curve& curve,
                                         const chemistry::ConstantsLibrary& library);

/// log10 of the side-reaction coefficient alpha_M = [M'] / [M] of metal
/// `metal` in a solved speciation: [M'] is all of the metal not bound to the
/// titrant (free, hydroxo, auxiliary-ligand and indicator complexes).
double log10_metal_fraction_coefficient(const chemistry::TitrationModel& model,
                                        const chemistry::Speciation& speciation, std::size_t metal);

/// The sample's metals in the order the titrant binds them: largest
/// log10(C K') first, with K' the conditional constant at the sample's pH
/// (7 when pH follows the proton balance) with its ligands, C the metal's
/// concentration in the sample. Errors name a missing constant.
veq::Result<std::vector<std::size_t>> titration_order(const chemistry::SampleComposition& sample,
                                                      const chemistry::ConstantsLibrary& library);

}  // namespace veq::detection::fit_support
