// Endpoint at the intersection of two straight segments, for curves whose
// signal is linear in the amount of titrant on each side of the equivalence
// point (photometric titrations: absorbance; also other additive signals).
#pragma once

#include <nlohmann/json.hpp>

#include "common/result.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::detection {

/// Tuning of the segments method; the reason for each default is beside it.
struct SegmentsOptions {
  /// Multiply absorbance by (sample + added volume) / sample volume before
  /// fitting. Default on: dilution bends the straight segments of a
  /// photometric titration by several percent over a typical curve (Skoog,
  /// West, Holler, Crouch, Fundamentals of Analytical Chemistry, 9th ed.,
  /// Section 26D, photometric titrations; recalled from memory). Applies to
  /// absorbance and transmittance curves only, and needs the curve's sample
  /// volume (flag dilution_not_corrected when it is unknown).
  bool dilution_correction = true;
  /// Fewest points each segment should have (flag few_points_in_segment
  /// below it; below 3 there is no endpoint). Default 5: two points define a
  /// line, five also show whether it is one.
  int min_points_per_segment = 5;
  /// A point joins a segment while it lies within this many standard
  /// deviations of the line predicted from the points already in it. Default
  /// 3: noise alone leaves a point out only about 3 times in 1000, while the
  /// curved region near the break, where the reaction is incomplete, is left
  /// out as soon as it departs from the line by three times the noise.
  double acceptance_sigma = 3.0;
  /// Share of each side's points, counted from the outer end of the curve,
  /// that seeds its segment before points closer to the break are tried.
  /// Default 0.5: the half of each side farthest from the break is straight
  /// in any titration worth evaluating this way.
  double seed_fraction = 0.5;
};

/// The options as JSON, every field spelt out.
nlohmann::json to_json(const SegmentsOptions& options);

/// Options from JSON: missing fields keep their defaults; an unknown field, a
/// value of the wrong type or out of range is an error naming the field.
veq::Result<SegmentsOptions> segments_options_from_json(const nlohmann::json& json);

/// Checks the ranges of the options; the error names the field.
veq::Result<void> validate(const SegmentsOptions& options);

/// One endpoint at the intersection of two least-squares lines.
///
/// Transmittance is first turned into absorbance (A = -log10(T/100)) and
/// absorbance is corrected for dilution. A two-phase regression (the split
/// that minimises the total squared residual of two lines) locates the break;
/// each segment is then seeded with the outer part of its side and grown
/// towards the break one point at a time while the next point agrees with the
/// line within acceptance_sigma (two misses in a row end the segment), which
/// leaves out the curved region automatically. Repeated until the split is
/// stable. The standard uncertainty of the intersection is propagated from
/// both fits: u^2 = (var line 1 + var line 2 at the intersection) / (slope 1 -
/// slope 2)^2 (first-order propagation, e.g. JCGM 100:2008 (GUM), 5.1.2).
///
/// Throws std::invalid_argument only for options that fail validate().
Evaluation find_endpoints_by_segments(const Curve& curve, const SegmentsOptions& options = {});

}  // namespace veq::detection
