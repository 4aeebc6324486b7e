#include "detection/derivative.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <string>

#include "detection/local_fit.hpp"

namespace veq::detection {

double default_min_break_height(SignalKind kind) noexcept {
  switch (kind) {
    case SignalKind::potential_mv:
      return 20.0;
    case SignalKind::p_metal:
      return 0.5;
    case SignalKind::ph:
      return 0.5;
    case SignalKind::absorbance:
      return 0.02;
    case SignalKind::transmittance:
      return 2.0;
  }
  return 20.0;
}

nlohmann::json to_json(const DerivativeOptions& options) {
  return {{"window_points", options.window_points},
          {"min_break_height", options.min_break_height},
          {"remove_spikes", options.remove_spikes},
          {"spike_threshold_sigma", options.spike_threshold_sigma},
          {"completion_fraction", options.completion_fraction},
          {"min_points_after_endpoint", options.min_points_after_endpoint}};
}

namespace {

veq::Error option_error(const std::string& field, const std::string& what) {
  return veq::make_error(veq::ErrorKind::invalid_input,
                         "derivative option '" + field + "': " + what);
}

}  // namespace

veq::Result<void> validate(const DerivativeOptions& o) {
  if (o.window_points < 3 || o.window_points % 2 == 0 ||
      o.window_points > static_cast<int>(local_fit::kMaxWindowPoints)) {
    return option_error("window_points", "must be an odd number from 3 to " +
                                             std::to_string(local_fit::kMaxWindowPoints) +
                                             ", got " + std::to_string(o.window_points));
  }
  if (!std::isfinite(o.min_break_height) || o.min_break_height < 0.0) {
    return option_error("min_break_height", "must be a finite number >= 0 (0 = default)");
  }
  if (!std::isfinite(o.spike_threshold_sigma) || o.spike_threshold_sigma <= 0.0) {
    return option_error("spike_threshold_sigma", "must be a finite number > 0");
  }
  if (!(o.completion_fraction > 0.0 && o.completion_fraction < 1.0)) {
    return option_error("completion_fraction", "must lie between 0 and 1 (exclusive)");
  }
  if (o.min_points_after_endpoint < 0) {
    return option_error("min_points_after_endpoint", "must be >= 0");
  }
  return {};
}

veq::Result<DerivativeOptions> derivative_options_from_json(const nlohmann::json& json) {
  if (!json.is_object()) {
    return veq::make_error(veq::ErrorKind::invalid_input,
                           "derivative options must be a JSON object");
  }
  DerivativeOptions o;
  for (const auto& [key, value] : json.items()) {
    if (key == "window_points" || key == "min_points_after_endpoint") {
      if (!value.is_number_integer())
        return option_error(key, "must be an integer");
      (key == "window_points" ? o.window_points : o.min_points_after_endpoint) = value.get<int>();
    } else if (key == "min_break_height" || key == "spike_threshold_sigma" ||
               key == "completion_fraction") {
      if (!value.is_number())
        return option_error(key, "must be a number");
      const double x = value.get<double>();
      if (key == "min_break_height")
        o.min_break_height = x;
      if (key == "spike_threshold_sigma")
        o.spike_threshold_sigma = x;
      if (key == "completion_fraction")
        o.completion_fraction = x;
    } else if (key == "remove_spikes") {
      if (!value.is_boolean())
        return option_error(key, "must be true or false");
      o.remove_spikes = value.get<bool>();
    } else {
      return option_error(key,
                          "unknown option; known: window_points, min_break_height, "
                          "remove_spikes, spike_threshold_sigma, completion_fraction, "
                          "min_points_after_endpoint");
    }
  }
  if (auto ok = validate(o); !ok)
    return ok.error();
  return o;
}

namespace {

const char* slope_unit(SignalKind kind) {
  switch (kind) {
    case SignalKind::potential_mv:
      return "mV/mL";
    case SignalKind::p_metal:
      return "pM/mL";
    case SignalKind::ph:
      return "pH/mL";
    case SignalKind::absorbance:
      return "absorbance/mL";
    case SignalKind::transmittance:
      return "%/mL";
  }
  return "1/mL";
}

// Vertex of the parabola through three points: its abscissa (clamped to
// [x0, x2]) and its height. Falls back to the middle point when the three are
// not concave.
struct Vertex {
  double x;
  double y;
};

Vertex parabola_vertex(double x0, double x1, double x2, double y0, double y1, double y2) {
  const double d1 = (y1 - y0) / (x1 - x0);
  const double d2 = (y2 - y1) / (x2 - x1);
  const double a = (d2 - d1) / (x2 - x0);
  if (!(a < 0.0))
    return {x1, y1};
  double x = 0.5 * (x0 + x1) - d1 / (2.0 * a);
  x = std::clamp(x, x0, x2);
  return {x, y0 + d1 * (x - x0) + a * (x - x0) * (x - x1)};
}

struct Candidate {
  std::size_t peak;  // index of the largest |slope|
  std::size_t lo;    // region where |slope| falls away monotonically
  std::size_t hi;
};

// Fraction of the smaller peak that the valley between two same-signed
// neighbouring maxima must keep for them to be one break: noise ripples on a
// broad break dip only slightly, while the buffer region between two real
// endpoints drops far lower.
constexpr double kMergeValleyFraction = 0.5;

// Sampling part of the standard uncertainty, as a fraction of the local volume
// step, for a break sharper than the steps (calibrated on simulated 1:1
// curves, see tests/detection/derivative_test.cpp): the vertex of the
// interpolated |slope| scatters by about a tenth of a step around the truth.
constexpr double kStepFraction = 0.1;

}  // namespace

Evaluation find_endpoints_by_derivative(const Curve& curve, const DerivativeOptions& options) {
  if (auto ok = validate(options); !ok)
    throw std::invalid_argument(ok.error().message);

  Evaluation result;
  result.method = "derivative";
  const double min_height = options.min_break_height > 0.0 ? options.min_break_height
                                                           : default_min_break_height(curve.kind());
  DerivativeOptions used = options;
  used.min_break_height = min_height;
  result.options = to_json(used);

  const std::vector<double>& v = curve.volume_ml();
  const std::size_t n = v.size();
  std::vector<double> e = curve.signal();
  std::vector<double> scratch;
  const double sigma = local_fit::noise_sd(v, e, scratch);

  if (options.remove_spikes && n >= 3) {
    DiagnosticSeries spikes{"spikes", signal_kind_name(curve.kind()), {}, {}};
    const double threshold = std::max(options.spike_threshold_sigma * sigma, 0.5 * min_height);
    const std::vector<double>& raw = curve.signal();
    for (std::size_t j = 1; j + 1 < n; ++j) {
      const double low = std::min(raw[j - 1], raw[j + 1]);
      const double high = std::max(raw[j - 1], raw[j + 1]);
      const double excess = raw[j] > high ? raw[j] - high : (raw[j] < low ? low - raw[j] : 0.0);
      if (excess > threshold && excess > 2.0 * (high - low)) {
        const double a = (v[j + 1] - v[j]) / (v[j + 1] - v[j - 1]);
        e[j] = a * raw[j - 1] + (1.0 - a) * raw[j + 1];
        spikes.x_ml.push_back(v[j]);
        spikes.y.push_back(raw[j]);
      }
    }
    if (!spikes.x_ml.empty()) {
      result.flags.push_back(QualityFlag::spikes_removed);
      result.diagnostics.series.push_back(std::move(spikes));
    }
  }

  // First derivative by local quadratic least squares in real volume.
  const std::size_t window =
      std::min<std::size_t>(static_cast<std::size_t>(options.window_points), n);
  std::vector<double> slope(n);
  double w[local_fit::kMaxWindowPoints];
  for (std::size_t i = 0; i < n; ++i) {
    const std::size_t start = local_fit::window_start(i, n, window);
    local_fit::slope_weights(v, i, start, window, w);
    double s = 0.0;
    for (std::size_t j = 0; j < window; ++j)
      s += w[j] * e[start + j];
    slope[i] = s;
  }

  // Local maxima of |slope| and the regions where it falls away from them.
  std::vector<Candidate> candidates;
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double a = std::abs(slope[i]);
    if (!(a > std::abs(slope[i - 1]) && a >= std::abs(slope[i + 1])))
      continue;
    const bool rising = slope[i] > 0.0;
    auto same_sign = [&](std::size_t j) { return rising ? slope[j] > 0.0 : slope[j] < 0.0; };
    std::size_t lo = i, hi = i;
    while (lo > 0 && same_sign(lo - 1) && std::abs(slope[lo - 1]) <= std::abs(slope[lo]))
      --lo;
    while (hi + 1 < n && same_sign(hi + 1) && std::abs(slope[hi + 1]) <= std::abs(slope[hi]))
      ++hi;
    if (!candidates.empty()) {
      Candidate& last = candidates.back();
      const bool last_rising = slope[last.peak] > 0.0;
      if (last_rising == rising && last.hi >= lo) {
        const double valley = std::abs(slope[lo]);
        const double smaller = std::min(std::abs(slope[last.peak]), a);
        if (valley >= kMergeValleyFraction * smaller) {
          if (a > std::abs(slope[last.peak]))
            last.peak = i;
          last.hi = hi;
          continue;
        }
      }
    }
    candidates.push_back({i, lo, hi});
  }

  const std::size_t half = window / 2;
  bool small_break = false;
  bool incomplete = false;
  for (const Candidate& c : candidates) {
    const double peak = std::abs(slope[c.peak]);
    const double height = std::abs(e[c.hi] - e[c.lo]);
    if (height < min_height) {
      if (height >= 0.5 * min_height)
        small_break = true;
      continue;
    }
    const double fall_to = options.completion_fraction * peak;
    bool right_done = false, left_done = false;
    for (std::size_t j = c.peak + 1; j < n && !right_done; ++j)
      right_done = std::abs(slope[j]) < fall_to;
    for (std::size_t j = c.peak; j-- > 0 && !left_done;)
      left_done = std::abs(slope[j]) < fall_to;
    if (!right_done) {
      incomplete = true;
      continue;
    }
    if (!left_done)
      continue;

    const std::size_t k = c.peak;
    const Vertex top = parabola_vertex(v[k - 1], v[k], v[k + 1], std::abs(slope[k - 1]), peak,
                                       std::abs(slope[k + 1]));
    Endpoint endpoint;
    endpoint.volume_ml = top.x;
    endpoint.steepness = top.y;
    const std::size_t right = top.x >= v[k] ? k + 1 : k;
    const double t = (top.x - v[right - 1]) / (v[right] - v[right - 1]);
    endpoint.signal = e[right - 1] + t * (e[right] - e[right - 1]);

    // Noise: the vertex is a function of the three slopes, each a linear
    // combination of signals; propagate sigma through both to first order.
    double gradient[local_fit::kMaxWindowPoints + 2] = {};
    const std::size_t first = local_fit::window_start(k - 1, n, window);
    const double ys[3] = {std::abs(slope[k - 1]), peak, std::abs(slope[k + 1])};
    for (std::size_t m = 0; m < 3; ++m) {
      double bumped[3] = {ys[0], ys[1], ys[2]};
      const double delta = 1e-6 * peak;
      bumped[m] += delta;
      const double dx_dy =
          (parabola_vertex(v[k - 1], v[k], v[k + 1], bumped[0], bumped[1], bumped[2]).x - top.x) /
          delta;
      const std::size_t i = k - 1 + m;
      const std::size_t start = local_fit::window_start(i, n, window);
      local_fit::slope_weights(v, i, start, window, w);
      const double sign = slope[i] < 0.0 ? -1.0 : 1.0;
      for (std::size_t j = 0; j < window; ++j)
        gradient[start + j - first] += dx_dy * sign * w[j];
    }
    double noise_variance = 0.0;
    for (double g : gradient)
      noise_variance += g * g;
    noise_variance *= sigma * sigma;
    const double step = 0.5 * (v[k + 1] - v[k - 1]);
    const double sampling = kStepFraction * step;
    endpoint.uncertainty_ml = std::sqrt(noise_variance + sampling * sampling);

    const auto after = static_cast<std::size_t>(
        v.end() - std::upper_bound(v.begin(), v.end(), endpoint.volume_ml));
    if (after < static_cast<std::size_t>(options.min_points_after_endpoint)) {
      endpoint.flags.push_back(QualityFlag::few_points_after_endpoint);
    }
    if (k < half + 1 || k + half + 2 > n)
      endpoint.flags.push_back(QualityFlag::near_curve_end);
    if (sampling * sampling > noise_variance)
      endpoint.flags.push_back(QualityFlag::coarse_steps);
    result.endpoints.push_back(std::move(endpoint));
  }

  // A curve that ends on its steepest stretch has a break under way.
  if (n >= 2 && std::abs(slope[n - 1]) > std::abs(slope[n - 2])) {
    std::size_t lo = n - 1;
    const bool rising = slope[n - 1] > 0.0;
    while (lo > 0 && (rising ? slope[lo - 1] > 0.0 : slope[lo - 1] < 0.0) &&
           std::abs(slope[lo - 1]) <= std::abs(slope[lo])) {
      --lo;
    }
    if (std::abs(e[n - 1] - e[lo]) >= min_height)
      incomplete = true;
  }

  if (result.endpoints.empty())
    result.flags.push_back(QualityFlag::no_endpoint);
  if (small_break)
    result.flags.push_back(QualityFlag::small_break);
  if (incomplete)
    result.flags.push_back(QualityFlag::break_incomplete);

  result.diagnostics.series.insert(
      result.diagnostics.series.begin(),
      DiagnosticSeries{"first_derivative", slope_unit(curve.kind()), v, std::move(slope)});
  for (std::size_t i = 0; i < result.endpoints.size(); ++i) {
    result.diagnostics.markers.push_back(
        {"endpoint " + std::to_string(i + 1), MarkerAxis::volume, result.endpoints[i].volume_ml});
  }
  return result;
}

}  // namespace veq::detection
