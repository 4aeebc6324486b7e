// Endpoint of a metal-ion electrode curve by Gran linearisation: functions
// of the signal that are straight lines in the titrant volume on either side
// of the equivalence point and cross zero there.
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

/// Which Gran functions give the endpoint.
enum class GranSides : int {
  both = 0,    ///< weighted mean of the two zero crossings
  before = 1,  ///< only the function before the equivalence point
  after = 2,   ///< only the function after it
};

/// "both", "before", "after".
const char* gran_sides_name(GranSides sides) noexcept;
std::optional<GranSides> gran_sides_from_name(std::string_view name);

/// Tuning of the Gran method; the reason for each default is beside it.
struct GranOptions {
  /// Electrode slope in mV per decade of metal-ion concentration, from a
  /// calibration; its sign is taken from the curve (a cation electrode's
  /// potential falls through the break). 0 (default) = fit the slope from
  /// the curve: real electrodes are often a few percent below the Nernst
  /// slope, and a slope wrong by 3 % moves the zero crossings by about as
  /// much as the curvature it leaves in the Gran functions. Ignored for
  /// p_metal curves, whose signal is already log10 of the concentration.
  double slope_mv_per_decade = 0.0;
  /// Which zero crossings give the endpoint. Default both: two independent
  /// estimates, and a check of each other (flag sides_disagree).
  GranSides sides = GranSides::both;
  /// Multiply the function before the equivalence point by the metal's side
  /// reaction coefficient alpha_M = [M']/[M] at each point's dilution, from
  /// the chemistry engine (needs `sample`). Default on: an auxiliary ligand
  /// (an ammonia buffer) holds a share of the metal that changes as the
  /// titrant dilutes the ligand, which bends the plain function and moves its
  /// zero crossing by tens of percent; without an auxiliary ligand the
  /// correction is a constant factor and changes nothing.
  bool correct_metal_fraction = true;
  /// A point joins a line while its residual, converted to signal units,
  /// lies within this many noise standard deviations of the line predicted
  /// from the points already in it. Default 3: noise alone turns a point away
  /// about 3 times in 1000, the curved region next to the equivalence point
  /// (incomplete reaction) is turned away as soon as it departs by three
  /// times the noise.
  double acceptance_sigma = 3.0;
  /// Fewest points each line should have (flag few_points_in_segment below
  /// it; below 3 that side gives no zero crossing). Default 5, as for the
  /// segments method: two points make a line, five also show whether it is
  /// one.
  int min_points_per_side = 5;
  /// The sample chemistry in the format of `veq predict` (docs/chemistry.md):
  /// the sample volume when the curve does not carry one, the metal (its
  /// charge sets the Nernst slope) and the ligands for the metal fraction.
  /// Optional: without it the plain Gran functions are used.
  std::optional<chemistry::SampleComposition> sample;
};

/// The options as JSON, every field spelt out (the sample as its document).
nlohmann::json to_json(const GranOptions& options);

/// Options from JSON: missing fields keep their defaults; "sample" is a
/// sample document; an unknown field, a value of the wrong type or out of
/// range is an error naming the field.
veq::Result<GranOptions> gran_options_from_json(const nlohmann::json& json);

/// Checks the ranges of the options; the error names the field.
veq::Result<void> validate(const GranOptions& options);

/// One endpoint from the zero crossings of the Gran functions of a metal-ion
/// electrode curve (signal kind potential_mv or p_metal).
///
/// With E = E0 + S log10[M] (S > 0 for a cation electrode), V0 the sample
/// volume and Ve the equivalence volume of a 1:1 titration:
/// - before the equivalence point the metal not yet bound to the titrant is
///   (V0 + V) [M'] = c_Y (Ve - V), so G1 = (V0 + V) 10^(E/S) alpha_M is a
///   straight line through zero at Ve (G. Gran, Analyst 77 (1952) 661;
///   the dilution factor (V0 + V) is part of the function);
/// - after it the free metal is set by the ratio of chelate to excess
///   titrant, [M] = [MY] / (K [Y']) with [MY] / [Y'] = Ve / (V - Ve), in
///   which the dilution cancels, so G2 = 10^(-E/S) is a straight line
///   through zero at Ve without any correction.
/// alpha_M = [M']/[M] comes from the chemistry engine at each point's
/// composition (options.correct_metal_fraction with a sample).
///
/// Each line is fitted by least squares on relative residuals (equal weight
/// for equal noise in the signal), seeded with the half of its side farthest
/// from the break and grown towards it while points agree with the line;
/// inner points that together bend away are dropped again, so the curved
/// region around the equivalence point is left out automatically; a point
/// that disagrees alone (a spike) is skipped. The ranges used are reported
/// in the diagnostics and the details. The zero crossing's standard
/// uncertainty follows from the regression's covariance (first-order
/// propagation, JCGM 100:2008 (GUM) 5.1.2); with a fitted slope, the slope's
/// own uncertainty is propagated too.
///
/// Errors: the sample cannot be built with the library (unknown metal or
/// ligand). A curve of another signal kind, or one without a break, is not
/// an error: the evaluation holds no endpoint and the flag no_endpoint.
/// Throws std::invalid_argument only for options that fail validate().
veq::Result<Evaluation> find_endpoints_by_gran(const Curve& curve, const GranOptions& options,
                                               const chemistry::ConstantsLibrary& library);

/// The same with the constants library shipped with veq.
veq::Result<Evaluation> find_endpoints_by_gran(const Curve& curve, const GranOptions& options = {});

}  // namespace veq::detection
