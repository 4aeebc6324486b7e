// Replayed curves: a stored volume-signal curve read from CSV or from a run's
// columns, interpolated linearly at the volume in the vessel.
#include <algorithm>
#include <charconv>
#include <cmath>
#include <string>

#include "simulator/scenario.hpp"

namespace veq::simulator {

namespace {

bool parse_number(std::string_view text, double& out) {
  while (!text.empty() && (text.front() == ' ' || text.front() == '\t'))
    text.remove_prefix(1);
  while (!text.empty() && (text.back() == ' ' || text.back() == '\t' || text.back() == '\r'))
    text.remove_suffix(1);
  if (text.empty())
    return false;
  const char* end = text.data() + text.size();
  auto [ptr, ec] = std::from_chars(text.data(), end, out);
  return ec == std::errc() && ptr == end;
}

}  // namespace

Result<ReplaySpec> replay_from_columns(const std::vector<double>& volume_ml,
                                       const std::vector<double>& signal) {
  if (volume_ml.size() != signal.size()) {
    return make_error(ErrorKind::invalid_input,
                      "replay: " + std::to_string(volume_ml.size()) + " volumes but " +
                          std::to_string(signal.size()) + " signal values");
  }
  if (volume_ml.size() < 2)
    return make_error(ErrorKind::invalid_input, "replay: needs at least two points");
  for (std::size_t i = 0; i < volume_ml.size(); ++i) {
    const std::string row = "replay: row " + std::to_string(i + 1) + ": ";
    if (!std::isfinite(volume_ml[i]) || !std::isfinite(signal[i]))
      return make_error(ErrorKind::invalid_input, row + "volume and signal must be finite numbers");
    if (i > 0 && !(volume_ml[i] > volume_ml[i - 1])) {
      return make_error(ErrorKind::invalid_input, row + "volume " + std::to_string(volume_ml[i]) +
                                                      " mL does not increase on the row before");
    }
  }
  ReplaySpec r;
  r.present = true;
  r.volume_ml = volume_ml;
  r.signal = signal;
  return r;
}

Result<ReplaySpec> parse_replay_csv(std::string_view text, std::string_view source_name) {
  std::vector<double> volume;
  std::vector<double> signal;
  std::size_t line_number = 0;
  std::size_t start = 0;
  while (start < text.size()) {
    std::size_t end = text.find('\n', start);
    if (end == std::string_view::npos)
      end = text.size();
    const std::string_view line = text.substr(start, end - start);
    start = end + 1;
    ++line_number;
    if (line.find_first_not_of(" \t\r") == std::string_view::npos)
      continue;
    const std::size_t comma = line.find_first_of(",;");
    const std::string where = std::string(source_name) + ": line " + std::to_string(line_number);
    if (comma == std::string_view::npos) {
      return make_error(ErrorKind::invalid_input,
                        where + ": expected two columns, volume_ml and signal");
    }
    std::string_view second = line.substr(comma + 1);
    // Further columns (a time, a temperature) are ignored.
    if (const std::size_t more = second.find_first_of(",;"); more != std::string_view::npos)
      second = second.substr(0, more);
    double v = 0.0;
    double s = 0.0;
    const bool v_ok = parse_number(line.substr(0, comma), v);
    const bool s_ok = parse_number(second, s);
    if (!v_ok || !s_ok) {
      if (volume.empty() && line_number == 1)
        continue;  // a header line
      return make_error(ErrorKind::invalid_input,
                        where + ": " + (v_ok ? "signal" : "volume") + " is not a number");
    }
    volume.push_back(v);
    signal.push_back(s);
  }
  auto r = replay_from_columns(volume, signal);
  if (!r)
    return make_error(ErrorKind::invalid_input,
                      std::string(source_name) + ": " + r.error().message);
  return r;
}

double replay_signal(const ReplaySpec& replay, double volume_ml, bool* outside) {
  const auto& v = replay.volume_ml;
  const auto& s = replay.signal;
  if (outside)
    *outside = false;
  if (v.empty())
    return std::nan("");
  if (volume_ml < v.front() || volume_ml > v.back()) {
    if (outside)
      *outside = true;
    return volume_ml < v.front() ? s.front() : s.back();
  }
  const auto it = std::lower_bound(v.begin(), v.end(), volume_ml);
  const std::size_t i = static_cast<std::size_t>(it - v.begin());
  if (v[i] == volume_ml)
    return s[i];  // a stored point is reproduced exactly
  const double f = (volume_ml - v[i - 1]) / (v[i] - v[i - 1]);
  return s[i - 1] + f * (s[i] - s[i - 1]);
}

}  // namespace veq::simulator
