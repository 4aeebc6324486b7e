// Small numerical helpers shared by the endpoint methods: local polynomial
// slopes on uneven volumes and a robust estimate of the signal noise.
#pragma once

#include <cstddef>
#include <span>
#include <vector>

namespace veq::detection::local_fit {

/// Largest window handled by slope_weights(), in points.
inline constexpr std::size_t kMaxWindowPoints = 31;

/// First index of the window of `window` points used for point `i` of a curve
/// of `n` points: centred where possible, shifted inwards at both ends.
inline std::size_t window_start(std::size_t i, std::size_t n, std::size_t window) noexcept {
  const std::size_t half = window / 2;
  if (i < half)
    return 0;
  const std::size_t start = i - half;
  return start + window > n ? n - window : start;
}

/// Weights w (length `window`) such that sum_j w[j] * signal[start + j] is the
/// slope at volume_ml[i], in signal units per mL, of the least-squares
/// quadratic through the points start..start+window-1 (at least 3 distinct
/// volumes). Linear in the signal, so the same weights propagate noise.
void slope_weights(std::span<const double> volume_ml, std::size_t i, std::size_t start,
                   std::size_t window, double* weights) noexcept;

/// The slope itself (same value as applying slope_weights()), in one pass.
double slope_at(std::span<const double> volume_ml, std::span<const double> signal, std::size_t i,
                std::size_t start, std::size_t window) noexcept;

/// Slopes at every point into `slope` (resized to the curve's length), with
/// windows of `window` points placed by window_start(). When the volume steps
/// are all equal (within 1e-9 of a step) the interior weights are the same at
/// every point and are computed once.
void slopes(std::span<const double> volume_ml, std::span<const double> signal, std::size_t window,
            std::vector<double>& slope);

/// Standard deviation of the signal noise, in signal units, estimated from the
/// curve itself: each interior point's distance from the straight line
/// through its two neighbours, scaled to one point's noise, and the root mean
/// square of those distances with the ones beyond three standard deviations
/// (a break, a spike) left out iteratively. Returns 0 for fewer than 3
/// points. `scratch` is reused to avoid allocation.
double noise_sd(std::span<const double> volume_ml, std::span<const double> signal,
                std::vector<double>& scratch);

}  // namespace veq::detection::local_fit
