// The derivative method on simulated potentiometric calcium-EDTA curves whose
// equivalence volume is known exactly (1:1 closed form + Nernst equation).
#include <gtest/gtest.h>

#include <cstdio>
#include <random>

#include "detection/derivative.hpp"
#include "tests/detection/synthetic.hpp"

namespace veq::detection {
namespace {

using testing::ErrorStats;
using testing::PotentialCurveSpec;

// Relative error (%) of the single endpoint found on each of `seeds` curves
// with the equivalence volume at random positions between volume steps.
std::vector<double> relative_errors_percent(int seeds, double step_ml, double noise_mv,
                                            double log10_shift_of_constant = 0.0) {
  std::vector<double> errors;
  for (int seed = 1; seed <= seeds; ++seed) {
    std::mt19937_64 rng(static_cast<std::uint64_t>(seed));
    PotentialCurveSpec spec;
    spec.noise_sd_mv = noise_mv;
    spec.equivalence_volume_ml = std::uniform_real_distribution<double>(9.75, 10.25)(rng);
    spec.conditional_constant *= std::pow(10.0, log10_shift_of_constant);
    const auto v = testing::fixed_steps(step_ml, 15.0);
    const auto curve = testing::make_curve(v, testing::potential_mv(spec, v, rng));
    const Evaluation ev = find_endpoints_by_derivative(curve);
    EXPECT_EQ(ev.endpoints.size(), 1u) << "seed " << seed;
    if (ev.endpoints.size() != 1)
      continue;
    errors.push_back(100.0 * (ev.endpoints[0].volume_ml - spec.equivalence_volume_ml) /
                     spec.equivalence_volume_ml);
  }
  return errors;
}

void report(const ErrorStats& s) {
  std::printf("  relative error over seeds: bias %.4f %%, sd %.4f %%, max |error| %.4f %%\n",
              s.mean, s.sd, s.max_abs);
}

// Acceptance of issue 5: strong break (~160 mV between 95 % and 105 % of the
// equivalence volume), 0.1 mV noise, fixed 0.05 mL steps, 50 seeds: every
// endpoint within 0.2 %, bias within 0.05 %, scatter within 0.1 %.
TEST(DerivativeMethod, CalciumEdtaFixedStepsLowNoise) {
  const auto errors = relative_errors_percent(50, 0.05, 0.1);
  ASSERT_EQ(errors.size(), 50u);
  const ErrorStats s = testing::stats(errors);
  report(s);
  EXPECT_LT(s.max_abs, 0.2);
  EXPECT_LT(std::abs(s.mean), 0.05);
  EXPECT_LT(s.sd, 0.1);
}

TEST(DerivativeMethod, WeakerBreakIsStillFound) {
  // K' lowered 30-fold (a titration at lower pH): break of ~110 mV across
  // 95-105 % of the equivalence volume.
  const auto errors = relative_errors_percent(50, 0.05, 0.1, -1.5);
  ASSERT_EQ(errors.size(), 50u);
  const ErrorStats s = testing::stats(errors);
  report(s);
  EXPECT_LT(s.max_abs, 0.2);
  EXPECT_LT(std::abs(s.mean), 0.05);
  EXPECT_LT(s.sd, 0.1);
}

TEST(DerivativeMethod, GrowingCurveNeverReportsABreakNotYetReached) {
  // The controller calls the method after every point: before the break there
  // must be no endpoint, and once found it must already be close to the truth.
  std::mt19937_64 rng(7);
  PotentialCurveSpec spec;
  spec.equivalence_volume_ml = 10.013;
  const auto v = testing::fixed_steps(0.05, 12.0);
  const auto e = testing::potential_mv(spec, v, rng);
  bool found = false;
  bool saw_incomplete = false;
  for (std::size_t n = Curve::kMinimumPoints; n <= v.size(); ++n) {
    const auto curve = testing::make_curve({v.begin(), v.begin() + static_cast<long>(n)},
                                           {e.begin(), e.begin() + static_cast<long>(n)});
    const Evaluation ev = find_endpoints_by_derivative(curve);
    if (v[n - 1] < spec.equivalence_volume_ml) {
      EXPECT_TRUE(ev.endpoints.empty()) << "endpoint reported before the break at n=" << n;
    }
    saw_incomplete |= has_flag(ev.flags, QualityFlag::break_incomplete);
    if (!ev.endpoints.empty()) {
      ASSERT_EQ(ev.endpoints.size(), 1u) << n;
      EXPECT_NEAR(ev.endpoints[0].volume_ml, spec.equivalence_volume_ml,
                  0.002 * spec.equivalence_volume_ml)
          << "n=" << n;
      found = true;
    } else {
      EXPECT_TRUE(has_flag(ev.flags, QualityFlag::no_endpoint));
    }
  }
  EXPECT_TRUE(found);
  EXPECT_TRUE(saw_incomplete);
}

TEST(DerivativeMethod, FlatNoisyCurveHasNoEndpoint) {
  std::mt19937_64 rng(3);
  std::normal_distribution<double> noise(0.0, 0.5);
  const auto v = testing::fixed_steps(0.1, 10.0);
  std::vector<double> e;
  for (double x : v)
    e.push_back(100.0 - 0.5 * x + noise(rng));
  const Evaluation ev = find_endpoints_by_derivative(testing::make_curve(v, e));
  EXPECT_TRUE(ev.endpoints.empty());
  EXPECT_TRUE(has_flag(ev.flags, QualityFlag::no_endpoint));
}

TEST(DerivativeMethod, SpikesAreIgnored) {
  std::mt19937_64 rng(11);
  PotentialCurveSpec spec;
  spec.equivalence_volume_ml = 10.02;
  const auto v = testing::fixed_steps(0.05, 15.0);
  auto e = testing::potential_mv(spec, v, rng);
  // Single bad readings of +-60 mV (an air bubble, a contact glitch), larger
  // than the minimum break height, away from and close to the break.
  for (double at : {2.0, 6.5, 9.7, 10.4, 13.0}) {
    const auto i = static_cast<std::size_t>(std::lround(at / 0.05));
    e[i] += (i % 2 == 0 ? 60.0 : -60.0);
  }
  const Evaluation ev = find_endpoints_by_derivative(testing::make_curve(v, e));
  ASSERT_EQ(ev.endpoints.size(), 1u);
  EXPECT_NEAR(ev.endpoints[0].volume_ml, spec.equivalence_volume_ml, 0.002 * 10.0);
  EXPECT_TRUE(has_flag(ev.flags, QualityFlag::spikes_removed));
}

TEST(DerivativeMethod, TwoEndpoints) {
  // Two metals of very different stability titrated one after the other:
  // modelled as the sum of two independent 1:1 potential steps (each
  // electrode-like term sees one metal), equivalence volumes 4.03 and 9.51 mL.
  for (int seed = 1; seed <= 20; ++seed) {
    std::mt19937_64 rng(static_cast<std::uint64_t>(seed));
    const auto v = testing::fixed_steps(0.05, 13.0);
    PotentialCurveSpec first, second;
    first.equivalence_volume_ml = 4.03;
    first.noise_sd_mv = 0.0;
    second.equivalence_volume_ml = 9.51;
    second.noise_sd_mv = 0.1;
    const auto a = testing::potential_mv(first, v, rng);
    const auto b = testing::potential_mv(second, v, rng);
    std::vector<double> e(v.size());
    for (std::size_t i = 0; i < v.size(); ++i)
      e[i] = a[i] + b[i];
    const Evaluation ev = find_endpoints_by_derivative(testing::make_curve(v, e));
    ASSERT_EQ(ev.endpoints.size(), 2u) << "seed " << seed;
    EXPECT_NEAR(ev.endpoints[0].volume_ml, 4.03, 0.002 * 4.03);
    EXPECT_NEAR(ev.endpoints[1].volume_ml, 9.51, 0.002 * 9.51);
    EXPECT_GT(ev.endpoints[0].steepness, 100.0);  // mV/mL: a sharp break
  }
}

TEST(DerivativeMethod, OptionsFromJson) {
  auto ok = derivative_options_from_json({{"window_points", 7}, {"min_break_height", 30.0}});
  ASSERT_TRUE(ok) << ok.error().message;
  EXPECT_EQ(ok->window_points, 7);
  EXPECT_DOUBLE_EQ(ok->min_break_height, 30.0);
  EXPECT_TRUE(ok->remove_spikes);  // default kept

  auto unknown = derivative_options_from_json({{"windowpoints", 7}});
  ASSERT_FALSE(unknown);
  EXPECT_NE(unknown.error().message.find("windowpoints"), std::string::npos);
  auto even = derivative_options_from_json({{"window_points", 4}});
  ASSERT_FALSE(even);
  EXPECT_NE(even.error().message.find("window_points"), std::string::npos);
  auto type = derivative_options_from_json({{"remove_spikes", 1}});
  ASSERT_FALSE(type);

  // The options recorded in the evaluation read back to the same options.
  const auto v = testing::fixed_steps(0.1, 2.0);
  const Evaluation ev = find_endpoints_by_derivative(testing::make_curve(v, v));
  auto back = derivative_options_from_json(ev.options);
  ASSERT_TRUE(back) << back.error().message;
  EXPECT_DOUBLE_EQ(back->min_break_height, 20.0);
}

}  // namespace
}  // namespace veq::detection
