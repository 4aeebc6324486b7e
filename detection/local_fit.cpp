#include "detection/local_fit.hpp"

#include <algorithm>
#include <cmath>

namespace veq::detection::local_fit {

void slope_weights(std::span<const double> volume_ml, std::size_t i, std::size_t start,
                   std::size_t window, double* weights) noexcept {
  // Normal equations of y = a + b x + c x^2 with x = v - v[i], so that b is the
  // slope at v[i]. x is scaled by the window's half span to keep the 3x3
  // system well conditioned for any step size.
  const double x0 = volume_ml[i];
  const double scale = 0.5 * (volume_ml[start + window - 1] - volume_ml[start]) > 0.0
                           ? 2.0 / (volume_ml[start + window - 1] - volume_ml[start])
                           : 1.0;
  double s0 = 0.0, s1 = 0.0, s2 = 0.0, s3 = 0.0, s4 = 0.0;
  for (std::size_t j = 0; j < window; ++j) {
    const double x = (volume_ml[start + j] - x0) * scale;
    const double x2 = x * x;
    s0 += 1.0;
    s1 += x;
    s2 += x2;
    s3 += x2 * x;
    s4 += x2 * x2;
  }
  const double det = s0 * (s2 * s4 - s3 * s3) - s1 * (s1 * s4 - s3 * s2) + s2 * (s1 * s3 - s2 * s2);
  // Row 1 of the inverse of the symmetric normal matrix (its cofactors / det).
  const double r0 = -(s1 * s4 - s3 * s2) / det;
  const double r1 = (s0 * s4 - s2 * s2) / det;
  const double r2 = -(s0 * s3 - s1 * s2) / det;
  for (std::size_t j = 0; j < window; ++j) {
    const double x = (volume_ml[start + j] - x0) * scale;
    weights[j] = (r0 + r1 * x + r2 * x * x) * scale;
  }
}

double slope_at(std::span<const double> volume_ml, std::span<const double> signal, std::size_t i,
                std::size_t start, std::size_t window) noexcept {
  // As slope_weights(), with the sums of y, x y and x^2 y taken in the same
  // pass; the signal is taken relative to signal[i], which leaves the slope
  // unchanged and keeps the sums small.
  const double x0 = volume_ml[i];
  const double y0 = signal[i];
  const double span = volume_ml[start + window - 1] - volume_ml[start];
  const double scale = span > 0.0 ? 2.0 / span : 1.0;
  double s0 = 0.0, s1 = 0.0, s2 = 0.0, s3 = 0.0, s4 = 0.0, t0 = 0.0, t1 = 0.0, t2 = 0.0;
  for (std::size_t j = start; j < start + window; ++j) {
    const double x = (volume_ml[j] - x0) * scale;
    const double x2 = x * x;
    const double y = signal[j] - y0;
    s0 += 1.0;
    s1 += x;
    s2 += x2;
    s3 += x2 * x;
    s4 += x2 * x2;
    t0 += y;
    t1 += x * y;
    t2 += x2 * y;
  }
  const double det = s0 * (s2 * s4 - s3 * s3) - s1 * (s1 * s4 - s3 * s2) + s2 * (s1 * s3 - s2 * s2);
  const double numerator =
      -(s1 * s4 - s3 * s2) * t0 + (s0 * s4 - s2 * s2) * t1 - (s0 * s3 - s1 * s2) * t2;
  return numerator / det * scale;
}

void slopes(std::span<const double> volume_ml, std::span<const double> signal, std::size_t window,
            std::vector<double>& slope) {
  const std::size_t n = volume_ml.size();
  slope.resize(n);
  const std::size_t half = window / 2;
  bool even_steps = n >= window + 2;
  if (even_steps) {
    const double h = volume_ml[1] - volume_ml[0];
    for (std::size_t i = 1; i + 1 < n && even_steps; ++i) {
      even_steps = std::abs(volume_ml[i + 1] - volume_ml[i] - h) <= 1e-9 * h;
    }
  }
  if (!even_steps) {
    for (std::size_t i = 0; i < n; ++i) {
      slope[i] = slope_at(volume_ml, signal, i, window_start(i, n, window), window);
    }
    return;
  }
  double w[kMaxWindowPoints];
  slope_weights(volume_ml, half, 0, window, w);
  for (std::size_t i = half; i + half < n; ++i) {
    const double* y = &signal[i - half];
    double s = 0.0;
    for (std::size_t j = 0; j < window; ++j)
      s += w[j] * y[j];
    slope[i] = s;
  }
  for (std::size_t i = 0; i < half; ++i) {
    slope[i] = slope_at(volume_ml, signal, i, 0, window);
    slope[n - 1 - i] = slope_at(volume_ml, signal, n - 1 - i, n - window, window);
  }
}

double noise_sd(std::span<const double> volume_ml, std::span<const double> signal,
                std::vector<double>& scratch) {
  const std::size_t n = signal.size();
  if (n < 3)
    return 0.0;
  // Squared residuals scaled by their variance factor. With hl, hr the steps
  // to the neighbours and span = hl + hr, the residual is
  // r = e_i - (hr e_(i-1) + hl e_(i+1)) / span with variance
  // sigma^2 (span^2 + hr^2 + hl^2) / span^2 for independent noise: one
  // division per point.
  scratch.resize(n - 2);
  double sum = 0.0;
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double hl = volume_ml[i] - volume_ml[i - 1];
    const double hr = volume_ml[i + 1] - volume_ml[i];
    const double span = hl + hr;
    const double scaled = span * signal[i] - hr * signal[i - 1] - hl * signal[i + 1];
    const double square = scaled * scaled / (span * span + hl * hl + hr * hr);
    scratch[i - 1] = square;
    sum += square;
  }
  // Iteratively trimmed mean square: residuals beyond 3 sigma of the current
  // estimate (a break, a spike, strong curvature) are left out and the
  // estimate is redone, until the variance settles within 1 % (0.5 % in
  // sigma, ample for an uncertainty; typically three or four passes). The mean square of a Gaussian
  // truncated at +-3 sigma is 0.97334 sigma^2 (1 - 2 c phi(c) / (2 Phi(c) - 1) with c = 3), which
  // is divided out. A selection (median) would be as robust but several times slower, and this runs
  // on every evaluation.
  double variance = sum / static_cast<double>(scratch.size());
  const std::size_t m = scratch.size();
  for (int iteration = 0; iteration < 30; ++iteration) {
    const double limit = 9.0 * variance;
    // Four independent sums so that the additions overlap.
    double kept_sum[4] = {}, kept[4] = {};
    std::size_t j = 0;
    for (; j + 4 <= m; j += 4) {
      for (std::size_t u = 0; u < 4; ++u) {
        // Arithmetic, not a branch: which residuals are kept is irregular.
        const double square = scratch[j + u];
        const double keep = static_cast<double>(square <= limit);
        kept_sum[u] += keep * square;
        kept[u] += keep;
      }
    }
    for (; j < m; ++j) {
      const bool keep = scratch[j] <= limit;
      kept_sum[0] += keep ? scratch[j] : 0.0;
      kept[0] += keep ? 1.0 : 0.0;
    }
    const double total_kept = kept[0] + kept[1] + kept[2] + kept[3];
    if (total_kept < 1.0)
      break;
    const double next =
        (kept_sum[0] + kept_sum[1] + kept_sum[2] + kept_sum[3]) / total_kept / 0.97334;
    const bool settled = std::abs(next - variance) <= 1e-2 * variance;
    variance = next;
    if (settled)
      break;
  }
  return std::sqrt(variance);
}

}  // namespace veq::detection::local_fit
