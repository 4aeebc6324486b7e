// Local polynomial slopes and the noise estimate, against reference values.
#include <gtest/gtest.h>

#include <random>
#include <vector>

#include "detection/local_fit.hpp"

namespace veq::detection::local_fit {
namespace {

TEST(SlopeWeights, EqualStepsMatchSavitzkyGolay) {
  // Savitzky & Golay, Anal. Chem. 36 (1964) 1627, first-derivative table for
  // a 5-point quadratic: (-2, -1, 0, 1, 2) / (10 h); the same values from
  // scipy.signal.savgol_coeffs(5, 2, deriv=1, delta=0.1, use='dot') (scipy
  // 1.10, Debian 12): [-2, -1, 0, 1, 2] for h = 0.1 mL.
  const std::vector<double> v = {1.0, 1.1, 1.2, 1.3, 1.4};
  double w[5];
  slope_weights(v, 2, 0, 5, w);
  const double expected[5] = {-2.0, -1.0, 0.0, 1.0, 2.0};
  for (int j = 0; j < 5; ++j)
    EXPECT_NEAR(w[j], expected[j], 1e-9) << j;
}

TEST(SlopeWeights, UnevenStepsMatchNumpyPolyfit) {
  // Reference: numpy 1.24 (Debian 12), np.polyfit(x - x0, y, 2)[1], the slope
  // at x0 of the least-squares quadratic, for these uneven volumes.
  const std::vector<double> v = {0.0, 0.13, 0.21, 0.5, 0.52, 0.9};
  const std::vector<double> y = {1.0, 2.5, 2.1, 4.0, 4.4, 3.0};
  double w[5];
  auto slope = [&](std::size_t i, std::size_t start) {
    slope_weights(v, i, start, 5, w);
    double s = 0.0;
    for (std::size_t j = 0; j < 5; ++j)
      s += w[j] * y[start + j];
    return s;
  };
  EXPECT_NEAR(slope(2, 0), 6.060415627664679, 1e-9);   // centred window
  EXPECT_NEAR(slope(2, 1), 7.633423945983316, 1e-9);   // window shifted right
  EXPECT_NEAR(slope(5, 1), -6.685559929001705, 1e-9);  // last point, one-sided
}

TEST(SlopeWeights, ExactOnQuadratics) {
  // Invariant: a least-squares quadratic reproduces a quadratic exactly, so
  // the slope of y = 3 + 2 v - 5 v^2 is 2 - 10 v at every point.
  const std::vector<double> v = {0.0, 0.05, 0.07, 0.2, 0.31, 0.33, 0.5};
  std::vector<double> y;
  for (double x : v)
    y.push_back(3.0 + 2.0 * x - 5.0 * x * x);
  double w[kMaxWindowPoints];
  for (std::size_t i = 0; i < v.size(); ++i) {
    const std::size_t start = window_start(i, v.size(), 5);
    slope_weights(v, i, start, 5, w);
    double s = 0.0;
    for (std::size_t j = 0; j < 5; ++j)
      s += w[j] * y[start + j];
    EXPECT_NEAR(s, 2.0 - 10.0 * v[i], 1e-9) << i;
  }
}

TEST(WindowStart, CentredAndShiftedAtEnds) {
  EXPECT_EQ(window_start(0, 10, 5), 0u);
  EXPECT_EQ(window_start(1, 10, 5), 0u);
  EXPECT_EQ(window_start(4, 10, 5), 2u);
  EXPECT_EQ(window_start(8, 10, 5), 5u);
  EXPECT_EQ(window_start(9, 10, 5), 5u);
}

TEST(NoiseSd, RecoversGaussianNoiseOnACurvedLine) {
  // 2000 points of a gentle curve with sigma = 0.3: the median-based
  // estimate has a relative standard error of about 1.5 % at this size, so
  // 6 % is four standard errors.
  std::mt19937_64 rng(5);
  std::normal_distribution<double> noise(0.0, 0.3);
  std::uniform_real_distribution<double> step(0.02, 0.08);
  std::vector<double> v{0.0}, y;
  for (int i = 1; i < 2000; ++i)
    v.push_back(v.back() + step(rng));
  for (double x : v)
    y.push_back(10.0 * std::sin(0.05 * x) + noise(rng));
  std::vector<double> scratch;
  EXPECT_NEAR(noise_sd(v, y, scratch), 0.3, 0.06 * 0.3);
}

}  // namespace
}  // namespace veq::detection::local_fit
