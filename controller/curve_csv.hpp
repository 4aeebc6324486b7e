// Curves from CSV text: column mapping, line-numbered errors, and the raw
// points ready to be stored or evaluated.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"
#include "detection/curve.hpp"

namespace veq::controller {

/// Which columns hold what.
struct CsvColumns {
  std::string volume = "volume_ml";           ///< titrant volume, mL (required)
  std::string signal = "signal";              ///< signal in the unit of the signal kind (required)
  std::string time = "time_s";                ///< time, s (used if present)
  std::string temperature = "temperature_c";  ///< °C (used if present)
};

/// A curve read from CSV, as the rows were written (in file order).
struct CsvCurve {
  std::vector<double> volume_ml, signal, time_s, temperature_c;
};

/// Parses CSV text (comma, semicolon or tab separated; a header line naming
/// the columns; '#' lines are comments). Every problem is reported with the
/// source name and line number: a missing column, a field that is not a
/// finite number, a row with too few fields, a volume that goes backwards.
Result<CsvCurve> parse_curve_csv(std::string_view text, std::string_view source,
                                 const CsvColumns& columns = {});

/// The validated detection curve of parsed rows.
Result<detection::Curve> to_curve(const CsvCurve& rows, detection::SignalKind kind,
                                  double sample_volume_ml);

}  // namespace veq::controller
