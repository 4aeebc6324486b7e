// The crossing method: exact on straight lines, directions, several
// crossings, and an honest uncertainty on simulated potential curves.
#include <gtest/gtest.h>

#include <cstdio>
#include <random>

#include "detection/crossing.hpp"
#include "tests/detection/synthetic.hpp"

namespace veq::detection {
namespace {

CrossingOptions at(double level, CrossingDirection d = CrossingDirection::either) {
  CrossingOptions o;
  o.level = level;
  o.direction = d;
  return o;
}

TEST(CrossingMethod, ExactOnAStraightLineWithUnevenSteps) {
  // E = 100 - 20 V crosses 37 mV at V = 63/20 = 3.15 mL.
  const std::vector<double> v = {0.0, 0.7, 1.1, 2.0, 2.95, 3.4, 4.1, 5.0};
  std::vector<double> e;
  for (double x : v)
    e.push_back(100.0 - 20.0 * x);
  const Evaluation ev = find_endpoints_by_crossing(testing::make_curve(v, e), at(37.0));
  ASSERT_EQ(ev.endpoints.size(), 1u);
  EXPECT_NEAR(ev.endpoints[0].volume_ml, 3.15, 1e-12);
  EXPECT_NEAR(ev.endpoints[0].steepness, 20.0, 1e-9);
  EXPECT_DOUBLE_EQ(ev.endpoints[0].signal, 37.0);
  EXPECT_NEAR(ev.endpoints[0].uncertainty_ml, 0.0, 1e-9);  // no noise, no curvature
}

TEST(CrossingMethod, DirectionsAndSeveralCrossings) {
  // Up to 10 at 1 mL, down to 0 at 2 mL, up to 10 at 3 mL: level 5 is met
  // rising at 0.5, falling at 1.5, rising at 2.5 mL.
  const std::vector<double> v = {0.0, 1.0, 2.0, 3.0};
  const std::vector<double> e = {0.0, 10.0, 0.0, 10.0};
  const auto curve = testing::make_curve(v, e);
  const Evaluation either = find_endpoints_by_crossing(curve, at(5.0));
  ASSERT_EQ(either.endpoints.size(), 1u);
  EXPECT_NEAR(either.endpoints[0].volume_ml, 0.5, 1e-12);
  EXPECT_TRUE(has_flag(either.flags, QualityFlag::several_crossings));
  const Evaluation falling = find_endpoints_by_crossing(curve, at(5.0, CrossingDirection::falling));
  ASSERT_EQ(falling.endpoints.size(), 1u);
  EXPECT_NEAR(falling.endpoints[0].volume_ml, 1.5, 1e-12);
  EXPECT_FALSE(has_flag(falling.flags, QualityFlag::several_crossings));
  const Evaluation none = find_endpoints_by_crossing(curve, at(50.0));
  EXPECT_TRUE(none.endpoints.empty());
  EXPECT_TRUE(has_flag(none.flags, QualityFlag::no_endpoint));
}

TEST(CrossingMethod, LevelIsRequired) {
  EXPECT_FALSE(crossing_options_from_json(nlohmann::json::object()));
  auto no_level = crossing_options_from_json({{"direction", "rising"}});
  ASSERT_FALSE(no_level);
  EXPECT_NE(no_level.error().message.find("'level'"), std::string::npos);
  EXPECT_FALSE(crossing_options_from_json({{"level", 1.0}, {"direction", "up"}}));
  EXPECT_FALSE(crossing_options_from_json({{"level", "1.0"}}));
  EXPECT_FALSE(crossing_options_from_json({{"level", 1.0}, {"threshold", 2}}));
  auto ok = crossing_options_from_json({{"level", -12.5}, {"direction", "falling"}});
  ASSERT_TRUE(ok);
  EXPECT_DOUBLE_EQ(ok->level, -12.5);
  EXPECT_EQ(ok->direction, CrossingDirection::falling);
  const auto v = testing::fixed_steps(0.1, 1.0);
  EXPECT_THROW(find_endpoints_by_crossing(testing::make_curve(v, v), CrossingOptions{}),
               std::invalid_argument);
}

TEST(CrossingMethod, UncertaintyIsHonest) {
  // 240 simulated calcium-EDTA curves (K' 10^7.6-10^10.6 L/mol, 0.05 or
  // 0.1 mL steps, 0.1 or 0.5 mV noise), the level at the equivalence
  // potential or 20 mV to either side; the truth is where the noiseless curve
  // crosses the level (found by bisection on the closed form).
  int within = 0;
  const int total = 240;
  for (int seed = 1; seed <= total; ++seed) {
    std::mt19937_64 rng(static_cast<std::uint64_t>(seed));
    testing::PotentialCurveSpec spec;
    spec.noise_sd_mv = seed % 2 ? 0.1 : 0.5;
    spec.conditional_constant *=
        std::pow(10.0, std::uniform_real_distribution<double>(-2.5, 0.5)(rng));
    spec.equivalence_volume_ml = std::uniform_real_distribution<double>(9.75, 10.25)(rng);
    testing::PotentialCurveSpec clean = spec;
    clean.noise_sd_mv = 0.0;
    auto clean_at = [&](double x) { return testing::potential_mv(clean, {x}, rng)[0]; };
    const double offsets[3] = {0.0, 20.0, -20.0};
    const double level = clean_at(spec.equivalence_volume_ml) + offsets[seed % 3];
    double lo = 5.0, hi = 14.9;  // the curve falls through the level once here
    for (int i = 0; i < 100; ++i) {
      const double mid = 0.5 * (lo + hi);
      (clean_at(mid) > level ? lo : hi) = mid;
    }
    const auto v = testing::fixed_steps(seed % 4 < 2 ? 0.05 : 0.1, 15.0);
    const auto curve = testing::make_curve(v, testing::potential_mv(spec, v, rng));
    const Evaluation ev = find_endpoints_by_crossing(curve, at(level));
    ASSERT_FALSE(ev.endpoints.empty()) << seed;
    const double error = ev.endpoints[0].volume_ml - 0.5 * (lo + hi);
    if (std::abs(error) <= 2.0 * ev.endpoints[0].uncertainty_ml)
      ++within;
  }
  const double share = static_cast<double>(within) / total;
  std::printf("  errors within 2u: %d of %d (%.1f %%)\n", within, total, 100.0 * share);
  EXPECT_GE(share, 0.90);
  EXPECT_LE(share, 0.98);
}

}  // namespace
}  // namespace veq::detection
