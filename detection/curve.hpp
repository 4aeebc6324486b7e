// A titration curve validated once, when it is built from outside data
// (a device run, a CSV file, a database row set): the value every endpoint
// method takes.
#pragma once

#include <cstddef>
#include <optional>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::detection {

/// What the signal column measures. Stored in SQLite files that outlive the
/// binary: the numbers are append-only, never reuse or renumber one.
enum class SignalKind : int {
  potential_mv = 1,   ///< electrode potential in mV
  p_metal = 2,        ///< pM = -log10 of the free metal concentration (dimensionless)
  ph = 3,             ///< pH (dimensionless)
  absorbance = 4,     ///< absorbance (decadic, dimensionless)
  transmittance = 5,  ///< transmittance in percent (0..100)
};

/// A short, stable name: "potential_mv", "p_metal", "ph", "absorbance",
/// "transmittance" (used in files and on the command line).
const char* signal_kind_name(SignalKind kind) noexcept;

/// The kind with that name (exact, lower case), or nothing.
std::optional<SignalKind> signal_kind_from_name(std::string_view name);

/// Raw columns as they come from a run or a file, before validation.
struct CurveColumns {
  std::vector<double> volume_ml;      ///< added titrant volume, mL
  std::vector<double> signal;         ///< signal in the unit of `kind`
  std::vector<double> time_s;         ///< time since the run started, s; may be empty
  std::vector<double> temperature_c;  ///< sample temperature, degrees Celsius; may be empty
  SignalKind kind = SignalKind::potential_mv;
  double sample_volume_ml = 0.0;  ///< sample volume before titrant, mL; 0 = unknown
};

/// A validated curve: volumes strictly increasing, all values finite, at least
/// Curve::kMinimumPoints points. Immutable once built.
class Curve {
 public:
  /// Fewest points a curve may have after equal volumes are merged. Three is
  /// the least that shows a change of slope; methods that need more say so in
  /// their result instead of refusing the curve, because a curve that is still
  /// being recorded must be evaluable as soon as it exists.
  static constexpr std::size_t kMinimumPoints = 3;

  /// Validates and builds a curve. Errors (kind invalid_input) name the row,
  /// counted from 1 in the order given:
  /// - columns of different lengths (time and temperature may be empty);
  /// - a NaN or infinite value (names the row and the column);
  /// - a volume smaller than the one before it (names the row);
  /// - a negative, NaN or infinite sample volume;
  /// - fewer than kMinimumPoints points.
  /// Consecutive rows with equal volumes are one reading repeated: they are
  /// merged into one point whose signal, time and temperature are the means.
  static veq::Result<Curve> from_columns(CurveColumns columns);

  std::size_t size() const noexcept { return volume_ml_.size(); }
  /// Added titrant, mL, strictly increasing.
  const std::vector<double>& volume_ml() const noexcept { return volume_ml_; }
  /// Signal in the unit of kind().
  const std::vector<double>& signal() const noexcept { return signal_; }
  /// Time since the run started, s; empty if not recorded.
  const std::vector<double>& time_s() const noexcept { return time_s_; }
  /// Sample temperature, degrees Celsius; empty if not recorded.
  const std::vector<double>& temperature_c() const noexcept { return temperature_c_; }
  SignalKind kind() const noexcept { return kind_; }
  /// Sample volume before titrant, mL; 0 when unknown.
  double sample_volume_ml() const noexcept { return sample_volume_ml_; }

 private:
  Curve() = default;

  std::vector<double> volume_ml_;
  std::vector<double> signal_;
  std::vector<double> time_s_;
  std::vector<double> temperature_c_;
  SignalKind kind_ = SignalKind::potential_mv;
  double sample_volume_ml_ = 0.0;
};

}  // namespace veq::detection
