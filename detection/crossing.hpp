// Endpoint where the signal crosses a preset value (an endpoint potential or
// pH known from the chemistry or from earlier titrations).
#pragma once

#include <cmath>
#include <limits>
#include <optional>
#include <string_view>

#include <nlohmann/json.hpp>

#include "common/result.hpp"
#include "detection/curve.hpp"
#include "detection/endpoint.hpp"

namespace veq::detection {

/// Which way the signal must be going when it crosses the level.
enum class CrossingDirection : int {
  either = 0,   ///< rising or falling
  rising = 1,   ///< signal increasing with volume
  falling = 2,  ///< signal decreasing with volume
};

/// "either", "rising", "falling".
const char* crossing_direction_name(CrossingDirection direction) noexcept;
std::optional<CrossingDirection> crossing_direction_from_name(std::string_view name);

/// Tuning of the crossing method.
struct CrossingOptions {
  /// The preset signal value, in the curve's signal unit. No default: it
  /// belongs to the chemistry of the titration (NaN until set; the method
  /// refuses to run without it).
  double level = std::numeric_limits<double>::quiet_NaN();
  /// Only crossings in this direction count. Default either: a curve has one
  /// direction of travel through its break, so either finds it.
  CrossingDirection direction = CrossingDirection::either;
};

/// The options as JSON, every field spelt out.
nlohmann::json to_json(const CrossingOptions& options);

/// Options from JSON ("level" is required); an unknown field or a value of the
/// wrong type is an error naming the field.
veq::Result<CrossingOptions> crossing_options_from_json(const nlohmann::json& json);

/// Checks the options (the level must be a finite number).
veq::Result<void> validate(const CrossingOptions& options);

/// The first volume at which the signal reaches `level` in the chosen
/// direction, by linear interpolation between the two bracketing points
/// (volumes may be uneven). Every crossing is listed in the diagnostics
/// (flag several_crossings if there is more than one). The standard
/// uncertainty combines the noise of the two bracketing points (estimated
/// from the curve) with the interpolation error, taken as the difference
/// between the linear and a cubic interpolation through the four nearest
/// points.
///
/// Throws std::invalid_argument only for options that fail validate().
Evaluation find_endpoints_by_crossing(const Curve& curve, const CrossingOptions& options);

}  // namespace veq::detection
