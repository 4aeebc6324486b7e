#include "controller/curve_csv.hpp"

#include <charconv>
#include <cmath>

namespace veq::controller {

namespace {

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t' || s.front() == '"')) {
    s.remove_prefix(1);
  }
  while (!s.empty() &&
         (s.back() == ' ' || s.back() == '\t' || s.back() == '\r' || s.back() == '"')) {
    s.remove_suffix(1);
  }
  return s;
}

std::vector<std::string_view> split(std::string_view line, char separator) {
  std::vector<std::string_view> out;
  std::size_t start = 0;
  while (true) {
    const auto at = line.find(separator, start);
    out.push_back(trim(line.substr(start, at - start)));
    if (at == std::string_view::npos)
      break;
    start = at + 1;
  }
  return out;
}

char guess_separator(std::string_view header) {
  for (char c : {'\t', ';', ','}) {
    if (header.find(c) != std::string_view::npos)
      return c;
  }
  return ',';
}

}  // namespace

Result<CsvCurve> parse_curve_csv(std::string_view text, std::string_view source,
                                 const CsvColumns& columns) {
  const std::string where(source);
  auto fail = [&](std::size_t line, const std::string& what) {
    return make_error(ErrorKind::invalid_input,
                      where + ": line " + std::to_string(line) + ": " + what);
  };
  CsvCurve out;
  int volume_col = -1, signal_col = -1, time_col = -1, temperature_col = -1;
  char separator = ',';
  bool have_header = false;
  std::size_t line_no = 0;
  std::size_t pos = 0;
  while (pos <= text.size()) {
    const auto end = text.find('\n', pos);
    std::string_view line =
        text.substr(pos, end == std::string_view::npos ? std::string_view::npos : end - pos);
    pos = end == std::string_view::npos ? text.size() + 1 : end + 1;
    ++line_no;
    if (trim(line).empty() || trim(line).front() == '#')
      continue;
    if (!have_header) {
      separator = guess_separator(line);
      const auto names = split(line, separator);
      for (std::size_t i = 0; i < names.size(); ++i) {
        const int col = static_cast<int>(i);
        if (names[i] == columns.volume)
          volume_col = col;
        if (names[i] == columns.signal)
          signal_col = col;
        if (names[i] == columns.time)
          time_col = col;
        if (names[i] == columns.temperature)
          temperature_col = col;
      }
      if (volume_col < 0)
        return fail(line_no, "no column named '" + columns.volume + "' in the header");
      if (signal_col < 0)
        return fail(line_no, "no column named '" + columns.signal + "' in the header");
      have_header = true;
      continue;
    }
    const auto fields = split(line, separator);
    auto number = [&](int col, const std::string& name, double& value) -> std::optional<Error> {
      if (col >= static_cast<int>(fields.size())) {
        return fail(line_no, "column '" + name + "' is missing (row has " +
                                 std::to_string(fields.size()) + " fields)");
      }
      const auto f = fields[static_cast<std::size_t>(col)];
      const auto [ptr, ec] = std::from_chars(f.data(), f.data() + f.size(), value);
      if (f.empty() || ec != std::errc() || ptr != f.data() + f.size()) {
        return fail(line_no, "'" + std::string(f) + "' in column '" + name + "' is not a number");
      }
      if (!std::isfinite(value)) {
        return fail(line_no,
                    "'" + std::string(f) + "' in column '" + name + "' is not a finite number");
      }
      return std::nullopt;
    };
    double v = 0, s = 0, t = 0, c = 0;
    if (auto e = number(volume_col, columns.volume, v))
      return *e;
    if (auto e = number(signal_col, columns.signal, s))
      return *e;
    if (time_col >= 0) {
      if (auto e = number(time_col, columns.time, t))
        return *e;
    }
    if (temperature_col >= 0) {
      if (auto e = number(temperature_col, columns.temperature, c))
        return *e;
    }
    if (v < 0.0)
      return fail(line_no, "volume " + std::string(fields[volume_col]) + " mL is negative");
    if (!out.volume_ml.empty() && v < out.volume_ml.back()) {
      return fail(line_no, "volume goes backwards (" + std::string(fields[volume_col]) +
                               " mL after " + std::to_string(out.volume_ml.back()) +
                               " mL); volumes must not decrease");
    }
    out.volume_ml.push_back(v);
    out.signal.push_back(s);
    if (time_col >= 0)
      out.time_s.push_back(t);
    if (temperature_col >= 0)
      out.temperature_c.push_back(c);
  }
  if (!have_header) {
    return make_error(ErrorKind::invalid_input, where + ": empty file, no header line");
  }
  if (out.volume_ml.size() < detection::Curve::kMinimumPoints) {
    return make_error(ErrorKind::invalid_input,
                      where + ": only " + std::to_string(out.volume_ml.size()) +
                          " data rows; a curve needs at least " +
                          std::to_string(detection::Curve::kMinimumPoints));
  }
  return out;
}

Result<detection::Curve> to_curve(const CsvCurve& rows, detection::SignalKind kind,
                                  double sample_volume_ml) {
  detection::CurveColumns c;
  c.volume_ml = rows.volume_ml;
  c.signal = rows.signal;
  c.time_s = rows.time_s;
  c.temperature_c = rows.temperature_c;
  c.kind = kind;
  c.sample_volume_ml = sample_volume_ml;
  return detection::Curve::from_columns(std::move(c));
}

}  // namespace veq::controller
