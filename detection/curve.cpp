#include "detection/curve.hpp"

#include <cmath>
#include <cstdio>
#include <string>
#include <utility>

namespace veq::detection {

const char* signal_kind_name(SignalKind kind) noexcept {
  switch (kind) {
    case SignalKind::potential_mv:
      return "potential_mv";
    case SignalKind::p_metal:
      return "p_metal";
    case SignalKind::ph:
      return "ph";
    case SignalKind::absorbance:
      return "absorbance";
    case SignalKind::transmittance:
      return "transmittance";
  }
  return "unknown";
}

std::optional<SignalKind> signal_kind_from_name(std::string_view name) {
  for (SignalKind kind : {SignalKind::potential_mv, SignalKind::p_metal, SignalKind::ph,
                          SignalKind::absorbance, SignalKind::transmittance}) {
    if (name == signal_kind_name(kind))
      return kind;
  }
  return std::nullopt;
}

namespace {

veq::Error curve_invalid(std::string message) {
  return veq::make_error(veq::ErrorKind::invalid_input, std::move(message));
}

std::string number_text(double value) {
  if (std::isnan(value))
    return "NaN";
  if (std::isinf(value))
    return value > 0 ? "infinity" : "-infinity";
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.10g", value);
  return buffer;
}

// Checks that an optional column is empty or as long as the volume column, and
// that every value in it is finite.
std::optional<veq::Error> check_column(const std::vector<double>& column, std::size_t rows,
                                       const char* name) {
  if (column.empty())
    return std::nullopt;
  if (column.size() != rows) {
    return curve_invalid(std::string("column '") + name + "' has " + std::to_string(column.size()) +
                         " rows but 'volume_ml' has " + std::to_string(rows) +
                         "; give every column the same number of rows or leave it out");
  }
  for (std::size_t i = 0; i < rows; ++i) {
    if (!std::isfinite(column[i])) {
      return curve_invalid("row " + std::to_string(i + 1) + ": '" + name + "' is " +
                           number_text(column[i]) + "; every value must be a finite number");
    }
  }
  return std::nullopt;
}

}  // namespace

veq::Result<Curve> Curve::from_columns(CurveColumns columns) {
  const std::size_t rows = columns.volume_ml.size();
  if (columns.signal.size() != rows) {
    return curve_invalid("column 'signal' has " + std::to_string(columns.signal.size()) +
                         " rows but 'volume_ml' has " + std::to_string(rows) +
                         "; give every column the same number of rows");
  }
  if (auto error = check_column(columns.volume_ml, rows, "volume_ml"))
    return *error;
  if (auto error = check_column(columns.signal, rows, "signal"))
    return *error;
  if (auto error = check_column(columns.time_s, rows, "time_s"))
    return *error;
  if (auto error = check_column(columns.temperature_c, rows, "temperature_c"))
    return *error;
  if (!std::isfinite(columns.sample_volume_ml) || columns.sample_volume_ml < 0.0) {
    return curve_invalid("sample volume is " + number_text(columns.sample_volume_ml) +
                         " mL; give a finite volume >= 0 mL (0 means unknown)");
  }
  for (std::size_t i = 1; i < rows; ++i) {
    if (columns.volume_ml[i] < columns.volume_ml[i - 1]) {
      return curve_invalid("row " + std::to_string(i + 1) + ": volume " +
                           number_text(columns.volume_ml[i]) + " mL is smaller than " +
                           number_text(columns.volume_ml[i - 1]) + " mL in row " +
                           std::to_string(i) + "; volumes must not go backwards");
    }
  }

  Curve curve;
  curve.kind_ = columns.kind;
  curve.sample_volume_ml_ = columns.sample_volume_ml;
  const bool has_time = !columns.time_s.empty();
  const bool has_temperature = !columns.temperature_c.empty();
  curve.volume_ml_.reserve(rows);
  curve.signal_.reserve(rows);
  if (has_time)
    curve.time_s_.reserve(rows);
  if (has_temperature)
    curve.temperature_c_.reserve(rows);

  // Merge runs of equal volumes by averaging: a repeated reading at the same
  // volume says more about the signal there, not about its slope.
  std::size_t start = 0;
  while (start < rows) {
    std::size_t end = start + 1;
    while (end < rows && columns.volume_ml[end] == columns.volume_ml[start])
      ++end;
    const double count = static_cast<double>(end - start);
    double signal_sum = 0.0, time_sum = 0.0, temperature_sum = 0.0;
    for (std::size_t i = start; i < end; ++i) {
      signal_sum += columns.signal[i];
      if (has_time)
        time_sum += columns.time_s[i];
      if (has_temperature)
        temperature_sum += columns.temperature_c[i];
    }
    curve.volume_ml_.push_back(columns.volume_ml[start]);
    curve.signal_.push_back(signal_sum / count);
    if (has_time)
      curve.time_s_.push_back(time_sum / count);
    if (has_temperature)
      curve.temperature_c_.push_back(temperature_sum / count);
    start = end;
  }

  if (curve.size() < kMinimumPoints) {
    return curve_invalid("the curve has " + std::to_string(curve.size()) +
                         " points with distinct volumes (" + std::to_string(rows) +
                         " rows given); at least " + std::to_string(kMinimumPoints) +
                         " are needed");
  }
  return curve;
}

}  // namespace veq::detection
