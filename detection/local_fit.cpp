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

double noise_sd(std::span<const double> volume_ml, std::span<const double> signal,
                std::vector<double>& scratch) {
  const std::size_t n = signal.size();
  if (n < 3)
    return 0.0;
  scratch.resize(n - 2);
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double span = volume_ml[i + 1] - volume_ml[i - 1];
    const double a = (volume_ml[i + 1] - volume_ml[i]) / span;  // weight of the left neighbour
    const double b = 1.0 - a;
    const double residual = signal[i] - (a * signal[i - 1] + b * signal[i + 1]);
    // Variance of the residual is sigma^2 (1 + a^2 + b^2) for independent noise.
    scratch[i - 1] = std::abs(residual) / std::sqrt(1.0 + a * a + b * b);
  }
  const auto middle = scratch.begin() + static_cast<std::ptrdiff_t>(scratch.size() / 2);
  std::nth_element(scratch.begin(), middle, scratch.end());
  double median = *middle;
  if (scratch.size() % 2 == 0) {
    median = 0.5 * (median + *std::max_element(scratch.begin(), middle));
  }
  return 1.4826 * median;
}

}  // namespace veq::detection::local_fit
