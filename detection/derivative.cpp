#include "detection/derivative.hpp"

#include <algorithm>
#include <cmath>
#include <optional>
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
          {"min_points_after_endpoint", options.min_points_after_endpoint},
          {"refine_sharp_breaks", options.refine_sharp_breaks}};
}

namespace {

veq::Error derivative_option_error(const std::string& field, const std::string& what) {
  return veq::make_error(veq::ErrorKind::invalid_input,
                         "derivative option '" + field + "': " + what);
}

}  // namespace

veq::Result<void> validate(const DerivativeOptions& o) {
  if (o.window_points < 3 || o.window_points % 2 == 0 ||
      o.window_points > static_cast<int>(local_fit::kMaxWindowPoints)) {
    return derivative_option_error("window_points",
                                   "must be an odd number from 3 to " +
                                       std::to_string(local_fit::kMaxWindowPoints) + ", got " +
                                       std::to_string(o.window_points));
  }
  if (!std::isfinite(o.min_break_height) || o.min_break_height < 0.0) {
    return derivative_option_error("min_break_height",
                                   "must be a finite number >= 0 (0 = default)");
  }
  if (!std::isfinite(o.spike_threshold_sigma) || o.spike_threshold_sigma <= 0.0) {
    return derivative_option_error("spike_threshold_sigma", "must be a finite number > 0");
  }
  if (!(o.completion_fraction > 0.0 && o.completion_fraction < 1.0)) {
    return derivative_option_error("completion_fraction", "must lie between 0 and 1 (exclusive)");
  }
  if (o.min_points_after_endpoint < 0) {
    return derivative_option_error("min_points_after_endpoint", "must be >= 0");
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
        return derivative_option_error(key, "must be an integer");
      (key == "window_points" ? o.window_points : o.min_points_after_endpoint) = value.get<int>();
    } else if (key == "min_break_height" || key == "spike_threshold_sigma" ||
               key == "completion_fraction") {
      if (!value.is_number())
        return derivative_option_error(key, "must be a number");
      const double x = value.get<double>();
      if (key == "min_break_height")
        o.min_break_height = x;
      if (key == "spike_threshold_sigma")
        o.spike_threshold_sigma = x;
      if (key == "completion_fraction")
        o.completion_fraction = x;
    } else if (key == "remove_spikes" || key == "refine_sharp_breaks") {
      if (!value.is_boolean())
        return derivative_option_error(key, "must be true or false");
      (key == "remove_spikes" ? o.remove_spikes : o.refine_sharp_breaks) = value.get<bool>();
    } else {
      return derivative_option_error(key,
                                     "unknown option; known: window_points, min_break_height, "
                                     "remove_spikes, spike_threshold_sigma, completion_fraction, "
                                     "min_points_after_endpoint, refine_sharp_breaks");
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

// The position and its sensitivities to dl and dr (for noise propagation).
struct FlankPosition {
  double volume_ml;
  double d_volume_d_left;
  double d_volume_d_right;
};

// Position of the equivalence point inside the jump interval [v1, v2] of a
// break much sharper than the steps, from the signal changes over the steps
// on either side (dl over [v0, v1], dr over [v2, v3], same sign as the jump).
// Near a sharp equivalence point a Nernstian electrode follows the logarithm
// of the excess reagent on both sides with the same slope s:
// |E(v) - E(Ve)| = s log10(|v - Ve| / w), so with x = Ve - v1 and h = v2 - v1
//   dl = s log10((x + v1 - v0) / x),  dr = s log10((h - x + v3 - v2) / (h - x)),
// and the ratio dl / dr, free of s and w, fixes x (it falls monotonically
// from infinity to 0 as x goes from 0 to h). The idea of locating the
// endpoint from the steps next to the largest one on a symmetric curve is
// J. M. H. Fortuin's (Anal. Chim. Acta 24 (1961) 175; recalled from memory).
// Returns nothing when the flanks do not both move with the jump.
std::optional<FlankPosition> logarithmic_flank_position(double v0, double v1, double v2, double v3,
                                                        double dl, double dr) {
  if (!(dl > 0.0) || !(dr > 0.0))
    return std::nullopt;
  const double h = v2 - v1, hl = v1 - v0, hr = v3 - v2;
  // Root of F(x) = dr ln((x + hl)/x) - dl ln((h - x + hr)/(h - x)), which
  // falls monotonically from +infinity at x = 0 to -infinity at x = h:
  // Newton steps, kept inside a shrinking bracket by bisection.
  auto f = [&](double x) {
    return dr * std::log((x + hl) / x) - dl * std::log((h - x + hr) / (h - x));
  };
  auto slope = [&](double x) {
    return dr * (1.0 / (x + hl) - 1.0 / x) - dl * (1.0 / (h - x) - 1.0 / (h - x + hr));
  };
  double lo = 0.0, hi = h, x = 0.5 * h;
  for (int iteration = 0; iteration < 100; ++iteration) {
    const double value = f(x);
    (value > 0.0 ? lo : hi) = x;
    double next = x - value / slope(x);
    if (!(next > lo && next < hi))
      next = 0.5 * (lo + hi);
    if (std::abs(next - x) <= 1e-13 * h) {
      x = next;
      break;
    }
    x = next;
  }
  // Implicit differentiation of F(x; dl, dr) = 0.
  const double fx = slope(x);
  const double f_left = -std::log((h - x + hr) / (h - x));
  const double f_right = std::log((x + hl) / x);
  return FlankPosition{v1 + x, -f_left / fx, -f_right / fx};
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

// Sampling part of the standard uncertainty of the interpolated maximum (used
// when the flank model below does not apply). When a break is sharper than the
// volume steps, the interpolated maximum cannot follow the equivalence volume
// between two steps exactly; its error is then a fraction of the step that
// grows with the share `q` of the break's signal change that falls into one
// step (largest of five steps around the endpoint / their sum). Calibrated on
// 16,000 simulated calcium-EDTA curves (conditional constants from 10^7.1 to
// 10^11.6 L/mol, steps 0.02-0.2 mL, noise 0.1 and 0.5 mV): the 95th
// percentile of |error| / step rises from about 0.02 at q = 0.37 to 0.24 at
// q = 0.7. Half of that 95th percentile is taken as the standard uncertainty,
// so that about 95 % of errors lie within twice it (the sampling error is
// bounded, close to uniform, not Gaussian).
double sampling_fraction_95(double q) {
  return std::clamp(0.75 * (q - 0.37), 0.0, 0.24);
}

// Share of the largest of five steps above which the flank model places the
// endpoint (DerivativeOptions::refine_sharp_breaks): on simulated
// calcium-EDTA curves it beats the interpolated maximum from a share of about
// 0.48 on (at 0.6 its scatter is a tenth of the maximum's).
constexpr double kRefineShare = 0.5;

// Share of the largest single step above which a break counts as sharper
// than the steps (flag coarse_steps): most of the signal change then falls
// between two readings.
constexpr double kCoarseShare = 0.6;

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
  const std::vector<double>& raw = curve.signal();
  // The noise estimate costs a sort-like pass, so it is made only when a
  // spike test or an uncertainty needs it.
  double sigma = -1.0;
  auto noise = [&]() {
    if (sigma < 0.0) {
      std::vector<double> scratch;
      sigma = local_fit::noise_sd(v, raw, scratch);
    }
    return sigma;
  };

  // The signal evaluated: the raw one, or a copy with spikes replaced.
  std::vector<double> cleaned;
  if (options.remove_spikes && n >= 3) {
    DiagnosticSeries spikes{"spikes", signal_kind_name(curve.kind()), {}, {}};
    for (std::size_t j = 1; j + 1 < n; ++j) {
      const double low = std::min(raw[j - 1], raw[j + 1]);
      const double high = std::max(raw[j - 1], raw[j + 1]);
      // How far the point stands out beyond both neighbours (<= 0 if between).
      const double excess = std::max(raw[j] - high, low - raw[j]);
      if (excess <= 0.5 * min_height)  // the common case, tested first
        continue;
      if (excess > 2.0 * (high - low) && excess > options.spike_threshold_sigma * noise()) {
        if (cleaned.empty())
          cleaned = raw;
        const double a = (v[j + 1] - v[j]) / (v[j + 1] - v[j - 1]);
        cleaned[j] = a * raw[j - 1] + (1.0 - a) * raw[j + 1];
        spikes.x_ml.push_back(v[j]);
        spikes.y.push_back(raw[j]);
      }
    }
    if (!spikes.x_ml.empty()) {
      result.flags.push_back(QualityFlag::spikes_removed);
      result.diagnostics.series.push_back(std::move(spikes));
    }
  }
  const std::vector<double>& e = cleaned.empty() ? raw : cleaned;

  // First derivative by local quadratic least squares in real volume.
  const std::size_t window =
      std::min<std::size_t>(static_cast<std::size_t>(options.window_points), n);
  std::vector<double> slope;
  local_fit::slopes(v, e, window, slope);
  double w[local_fit::kMaxWindowPoints];

  // Local maxima of |slope| and the regions where it falls away from them.
  std::vector<Candidate> candidates;
  candidates.reserve(16);
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double a = std::abs(slope[i]);
    // Non-short-circuit test: on a noisy curve a third of the points are
    // local maxima, so a branch per comparison mispredicts often.
    if ((static_cast<int>(a > std::abs(slope[i - 1])) &
         static_cast<int>(a >= std::abs(slope[i + 1]))) == 0)
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
    // Uneven steps tilt the fits' response to a jump: a jump between two
    // readings, seen through windows of different spans, peaks off the
    // middle of its interval. The same vertex computed for a pure unit step
    // in the largest-change interval next to the maximum measures that tilt
    // (zero for even steps). It is removed in full for a pure jump and not at
    // all for a break spread over several steps: the weight rises from 0 to
    // 1 as the jump's share of the local change (below) goes from 1/3 to 1
    // (the proportion halved the spread of endpoints on simulated curves
    // recorded with shrinking steps).
    const std::size_t jump = std::abs(e[k + 1] - e[k]) >= std::abs(e[k] - e[k - 1]) ? k : k - 1;
    double unit_step[3];
    for (std::size_t m = 0; m < 3; ++m) {
      const std::size_t i = k - 1 + m;
      const std::size_t start = local_fit::window_start(i, n, window);
      local_fit::slope_weights(v, i, start, window, w);
      double s = 0.0;
      for (std::size_t j = 0; j < window; ++j) {
        if (start + j > jump)
          s += w[j];
      }
      unit_step[m] = std::abs(s);
    }
    const double tilt_full =
        parabola_vertex(v[k - 1], v[k], v[k + 1], unit_step[0], unit_step[1], unit_step[2]).x -
        0.5 * (v[jump] + v[jump + 1]);
    // Share of the signal change over the five steps around the jump that
    // falls into the jump itself: 1/5 on a straight line, near 1 for a break
    // much sharper than the steps.
    double largest = 0.0, total = 0.0;
    for (std::size_t i = jump >= 2 ? jump - 2 : 0; i < std::min(jump + 3, n - 1); ++i) {
      const double change = std::abs(e[i + 1] - e[i]);
      largest = std::max(largest, change);
      total += change;
    }
    const double share = total > 0.0 ? largest / total : 0.0;
    const double tilt_weight = std::clamp((share - 1.0 / 3.0) * 1.5, 0.0, 1.0);
    // How much of the tilt belongs to this break is known only roughly: treat
    // the weight as uncertain over its whole range (standard uncertainty of a
    // uniform distribution on [0, 1], 1/sqrt(12) ~ 0.3; GUM 4.3.7).
    const double tilt_uncertainty = 0.3 * std::abs(tilt_full);
    Endpoint endpoint;
    endpoint.volume_ml = top.x - tilt_weight * tilt_full;
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
    noise_variance *= noise() * noise();
    const double sampling = 0.5 * sampling_fraction_95(share) * (v[jump + 1] - v[jump]);
    endpoint.uncertainty_ml =
        std::sqrt(noise_variance + sampling * sampling + tilt_uncertainty * tilt_uncertainty);

    // A break sharper than the steps: place the endpoint inside the jump from
    // its flanks instead (see logarithmic_flank_position).
    if (options.refine_sharp_breaks && share >= kRefineShare && jump >= 1 && jump + 2 < n) {
      const double direction = e[jump + 1] > e[jump] ? 1.0 : -1.0;
      const double h = v[jump + 1] - v[jump];
      const auto refined = logarithmic_flank_position(
          v[jump - 1], v[jump], v[jump + 1], v[jump + 2], direction * (e[jump] - e[jump - 1]),
          direction * (e[jump + 2] - e[jump + 1]));
      if (refined) {
        // Noise through the four readings, to first order: dl and dr are each
        // the difference of two readings.
        const double variance = 2.0 * (refined->d_volume_d_left * refined->d_volume_d_left +
                                       refined->d_volume_d_right * refined->d_volume_d_right);
        // Model error: the logarithmic form holds once the readings are well
        // outside the break's own width; calibrated on the same simulated
        // curves as above, about 3 % of a step at share 0.5 falling to 0.5 %
        // from share 0.6 on.
        const double model = h * std::clamp(0.03 - 0.25 * (share - kRefineShare), 0.005, 0.03);
        endpoint.volume_ml = refined->volume_ml;
        endpoint.uncertainty_ml = std::sqrt(variance * noise() * noise() + model * model);
        const double t = (refined->volume_ml - v[jump]) / h;
        endpoint.signal = e[jump] + t * (e[jump + 1] - e[jump]);
      }
    }

    const auto after = static_cast<std::size_t>(
        v.end() - std::upper_bound(v.begin(), v.end(), endpoint.volume_ml));
    if (after < static_cast<std::size_t>(options.min_points_after_endpoint)) {
      endpoint.flags.push_back(QualityFlag::few_points_after_endpoint);
    }
    if (k < half + 1 || k + half + 2 > n)
      endpoint.flags.push_back(QualityFlag::near_curve_end);
    if (share > kCoarseShare)
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
