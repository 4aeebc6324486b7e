// The derivative method on simulated potentiometric calcium-EDTA curves whose
// equivalence volume is known exactly (1:1 closed form + Nernst equation).
#include <gtest/gtest.h>

#include <cstdio>
#include <optional>
#include <random>
#include <stdexcept>

#include "detection/derivative.hpp"
#include "tests/detection/synthetic.hpp"

namespace veq::detection {
namespace {

using testing::ErrorStats;
using testing::PotentialCurveSpec;

enum class Steps { fixed_0_05_ml, fixed_0_1_ml, shrinking };

std::vector<double> volumes(Steps steps) {
  switch (steps) {
    case Steps::fixed_0_05_ml:
      return testing::fixed_steps(0.05, 15.0);
    case Steps::fixed_0_1_ml:
      return testing::fixed_steps(0.1, 15.0);
    case Steps::shrinking:
      // 0.2 mL far from the expected 10 mL, down to 0.02 mL near it.
      return testing::shrinking_steps(0.2, 0.02, 10.0, 1.0, 15.0);
  }
  return {};
}

struct Outcome {
  double relative_error_percent;
  double error_ml;
  double uncertainty_ml;
};

// One seeded calcium-EDTA curve, equivalence volume uniform in 9.75-10.25 mL
// (so at a random position between steps), evaluated with default options.
std::optional<Outcome> run(std::uint64_t seed, Steps steps, double noise_mv,
                           double log10_shift_of_constant = 0.0) {
  std::mt19937_64 rng(seed);
  PotentialCurveSpec spec;
  spec.noise_sd_mv = noise_mv;
  spec.equivalence_volume_ml = std::uniform_real_distribution<double>(9.75, 10.25)(rng);
  spec.conditional_constant *= std::pow(10.0, log10_shift_of_constant);
  const auto v = volumes(steps);
  const auto curve = testing::make_curve(v, testing::potential_mv(spec, v, rng));
  const Evaluation ev = find_endpoints_by_derivative(curve);
  if (ev.endpoints.size() != 1)
    return std::nullopt;
  const double error = ev.endpoints[0].volume_ml - spec.equivalence_volume_ml;
  return Outcome{100.0 * error / spec.equivalence_volume_ml, error, ev.endpoints[0].uncertainty_ml};
}

// Relative error (%) of the single endpoint found on each of `seeds` curves.
std::vector<double> relative_errors_percent(int seeds, Steps steps, double noise_mv,
                                            double log10_shift_of_constant = 0.0) {
  std::vector<double> errors;
  for (int seed = 1; seed <= seeds; ++seed) {
    const auto outcome =
        run(static_cast<std::uint64_t>(seed), steps, noise_mv, log10_shift_of_constant);
    EXPECT_TRUE(outcome.has_value()) << "seed " << seed;
    if (outcome)
      errors.push_back(outcome->relative_error_percent);
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
  const auto errors = relative_errors_percent(50, Steps::fixed_0_05_ml, 0.1);
  ASSERT_EQ(errors.size(), 50u);
  const ErrorStats s = testing::stats(errors);
  report(s);
  EXPECT_LT(s.max_abs, 0.2);
  EXPECT_LT(std::abs(s.mean), 0.05);
  EXPECT_LT(s.sd, 0.1);
}

TEST(DerivativeMethod, InterpolatedMaximumAloneMeetsTheAcceptance) {
  // Without the flank model (refine_sharp_breaks off) the vertex of the
  // parabola through |dE/dV| still meets the bounds at 0.05 mL steps.
  std::vector<double> errors;
  DerivativeOptions plain;
  plain.refine_sharp_breaks = false;
  for (int seed = 1; seed <= 50; ++seed) {
    std::mt19937_64 rng(static_cast<std::uint64_t>(seed));
    PotentialCurveSpec spec;
    spec.equivalence_volume_ml = std::uniform_real_distribution<double>(9.75, 10.25)(rng);
    const auto v = volumes(Steps::fixed_0_05_ml);
    const auto curve = testing::make_curve(v, testing::potential_mv(spec, v, rng));
    const Evaluation ev = find_endpoints_by_derivative(curve, plain);
    ASSERT_EQ(ev.endpoints.size(), 1u) << seed;
    errors.push_back(100.0 * (ev.endpoints[0].volume_ml - spec.equivalence_volume_ml) /
                     spec.equivalence_volume_ml);
  }
  const ErrorStats s = testing::stats(errors);
  report(s);
  EXPECT_LT(s.max_abs, 0.2);
  EXPECT_LT(std::abs(s.mean), 0.05);
  EXPECT_LT(s.sd, 0.1);
}

TEST(DerivativeMethod, WeakerBreakIsStillFound) {
  // K' lowered 30-fold (a titration at lower pH): break of ~110 mV across
  // 95-105 % of the equivalence volume.
  const auto errors = relative_errors_percent(50, Steps::fixed_0_05_ml, 0.1, -1.5);
  ASSERT_EQ(errors.size(), 50u);
  const ErrorStats s = testing::stats(errors);
  report(s);
  EXPECT_LT(s.max_abs, 0.2);
  EXPECT_LT(std::abs(s.mean), 0.05);
  EXPECT_LT(s.sd, 0.1);
}

// The matrix of issue 5: 50 seeds for each of 0.1 and 0.5 mV noise and fixed
// 0.05 mL, fixed 0.1 mL and shrinking steps, on the strong (pH 10) break:
// bias within 0.05 %, scatter within 0.1 %, every endpoint within 0.2 %.
struct MatrixCase {
  Steps steps;
  double noise_mv;
  double max_sd_percent;
};

class DerivativeMatrix : public ::testing::TestWithParam<MatrixCase> {};

TEST_P(DerivativeMatrix, BiasAndScatterOver50Seeds) {
  const MatrixCase c = GetParam();
  const auto errors = relative_errors_percent(50, c.steps, c.noise_mv);
  ASSERT_EQ(errors.size(), 50u);
  const ErrorStats s = testing::stats(errors);
  report(s);
  EXPECT_LT(std::abs(s.mean), 0.05);
  EXPECT_LT(s.sd, c.max_sd_percent);
  EXPECT_LT(s.max_abs, 0.2);
}

INSTANTIATE_TEST_SUITE_P(StepsAndNoise, DerivativeMatrix,
                         ::testing::Values(MatrixCase{Steps::fixed_0_05_ml, 0.1, 0.1},
                                           MatrixCase{Steps::fixed_0_05_ml, 0.5, 0.1},
                                           MatrixCase{Steps::fixed_0_1_ml, 0.1, 0.1},
                                           MatrixCase{Steps::fixed_0_1_ml, 0.5, 0.1},
                                           MatrixCase{Steps::shrinking, 0.1, 0.1},
                                           MatrixCase{Steps::shrinking, 0.5, 0.1}));

// Honest uncertainty (issue 5): over 240 seeded curves of varied sharpness
// (conditional constant 10^8.1-10^10.6 L/mol), steps and noise, between 90 %
// and 98 % of the errors lie within twice the reported standard uncertainty.
TEST(DerivativeMethod, UncertaintyIsHonest) {
  int within = 0, total = 0;
  const Steps all_steps[] = {Steps::fixed_0_05_ml, Steps::fixed_0_1_ml, Steps::shrinking};
  for (int seed = 1; seed <= 240; ++seed) {
    std::mt19937_64 pick(static_cast<std::uint64_t>(1000 + seed));
    const double shift = std::uniform_real_distribution<double>(-2.0, 0.5)(pick);
    const Steps steps = all_steps[seed % 3];
    const double noise = seed % 2 == 0 ? 0.1 : 0.5;
    const auto outcome = run(static_cast<std::uint64_t>(seed), steps, noise, shift);
    ASSERT_TRUE(outcome.has_value()) << seed;
    ++total;
    if (std::abs(outcome->error_ml) <= 2.0 * outcome->uncertainty_ml)
      ++within;
  }
  const double share = static_cast<double>(within) / total;
  std::printf("  errors within 2u: %d of %d (%.1f %%)\n", within, total, 100.0 * share);
  EXPECT_GE(share, 0.90);
  EXPECT_LE(share, 0.98);
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

TEST(DerivativeMethod, TinyAndFlatCurvesDoNotCrash) {
  // Three points (the fewest a curve may have), a constant signal, a single
  // step: no endpoint where there is no break, and never a crash.
  const Evaluation three =
      find_endpoints_by_derivative(testing::make_curve({0.0, 0.1, 0.2}, {5.0, 6.0, 200.0}));
  EXPECT_TRUE(three.endpoints.empty());
  const auto v = testing::fixed_steps(0.1, 3.0);
  const Evaluation flat =
      find_endpoints_by_derivative(testing::make_curve(v, std::vector<double>(v.size(), 42.0)));
  EXPECT_TRUE(flat.endpoints.empty());
  EXPECT_TRUE(has_flag(flat.flags, QualityFlag::no_endpoint));
  std::vector<double> step(v.size(), 0.0);
  for (std::size_t i = v.size() / 2; i < v.size(); ++i)
    step[i] = 100.0;
  const Evaluation jump = find_endpoints_by_derivative(testing::make_curve(v, step));
  ASSERT_EQ(jump.endpoints.size(), 1u);
  // A pure step between two readings: by symmetry the endpoint is midway.
  const double mid = 0.5 * (v[v.size() / 2 - 1] + v[v.size() / 2]);
  EXPECT_NEAR(jump.endpoints[0].volume_ml, mid, 1e-9);
  EXPECT_TRUE(has_flag(jump.endpoints[0].flags, QualityFlag::coarse_steps));
}

TEST(DerivativeMethod, SmallBreakIsFlaggedNotReported) {
  // A 12 mV step, below the default 20 mV minimum for potentials.
  std::mt19937_64 rng(2);
  std::normal_distribution<double> noise(0.0, 0.1);
  const auto v = testing::fixed_steps(0.1, 10.0);
  std::vector<double> e;
  for (double x : v)
    e.push_back(6.0 * std::tanh((x - 5.03) / 0.2) + noise(rng));
  const Evaluation ev = find_endpoints_by_derivative(testing::make_curve(v, e));
  EXPECT_TRUE(ev.endpoints.empty());
  EXPECT_TRUE(has_flag(ev.flags, QualityFlag::small_break));
  DerivativeOptions lower;
  lower.min_break_height = 5.0;
  const Evaluation found = find_endpoints_by_derivative(testing::make_curve(v, e), lower);
  ASSERT_EQ(found.endpoints.size(), 1u);
  // tanh is point-symmetric about 5.03 mL, so its steepest point is there.
  EXPECT_NEAR(found.endpoints[0].volume_ml, 5.03, 0.01);
}

TEST(DerivativeMethod, InvalidOptionsThrowForProgrammers) {
  const auto v = testing::fixed_steps(0.1, 2.0);
  DerivativeOptions bad;
  bad.window_points = 4;
  EXPECT_THROW(find_endpoints_by_derivative(testing::make_curve(v, v), bad), std::invalid_argument);
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
