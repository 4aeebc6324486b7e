// The segments method on photometric curves: exact lines, dilution,
// transmittance, simulated 1:1 titrations with a known equivalence volume.
#include <gtest/gtest.h>

#include <cstdio>
#include <random>

#include "detection/segments.hpp"
#include "tests/detection/synthetic.hpp"

namespace veq::detection {
namespace {

// Two straight lines in dilution-corrected absorbance meeting at 8.37 mL,
// turned into what a photometer reads (divided by the dilution factor).
// The intersection of y = a1 + b1 v and y = a2 + b2 v is (a2 - a1)/(b1 - b2).
constexpr double kSampleMl = 50.0;
constexpr double kCornerMl = 8.37;
double corrected(double v) {
  return v < kCornerMl ? 0.02 + 0.018 * v : 0.02 + 0.018 * kCornerMl + 0.001 * (v - kCornerMl);
}
std::vector<double> read_absorbance(const std::vector<double>& v) {
  std::vector<double> a;
  for (double x : v)
    a.push_back(corrected(x) * kSampleMl / (kSampleMl + x));
  return a;
}

TEST(SegmentsMethod, ExactOnTwoStraightLinesAfterDilutionCorrection) {
  const auto v = testing::shrinking_steps(0.4, 0.1, 8.0, 2.0, 16.0);  // uneven steps
  const Evaluation ev = find_endpoints_by_segments(
      testing::make_curve(v, read_absorbance(v), SignalKind::absorbance, kSampleMl));
  ASSERT_EQ(ev.endpoints.size(), 1u);
  EXPECT_NEAR(ev.endpoints[0].volume_ml, kCornerMl, 1e-6);
  EXPECT_NEAR(ev.endpoints[0].steepness, 0.018 - 0.001, 1e-6);
  // Signal at the endpoint is in the curve's own unit (read absorbance).
  EXPECT_NEAR(ev.endpoints[0].signal, corrected(kCornerMl) * kSampleMl / (kSampleMl + kCornerMl),
              1e-6);
  EXPECT_TRUE(ev.endpoints[0].flags.empty());
}

TEST(SegmentsMethod, WithoutDilutionCorrectionTheLinesBend) {
  const auto v = testing::fixed_steps(0.25, 16.0);
  const auto curve = testing::make_curve(v, read_absorbance(v), SignalKind::absorbance, kSampleMl);
  SegmentsOptions off;
  off.dilution_correction = false;
  const Evaluation ev = find_endpoints_by_segments(curve, off);
  ASSERT_EQ(ev.endpoints.size(), 1u);
  // Dilution bends both lines by up to 25 % here; the uncorrected corner is
  // visibly off (several hundredths of a mL).
  EXPECT_GT(std::abs(ev.endpoints[0].volume_ml - kCornerMl), 0.02);

  const Evaluation unknown = find_endpoints_by_segments(
      testing::make_curve(v, read_absorbance(v), SignalKind::absorbance, 0.0));
  EXPECT_TRUE(has_flag(unknown.flags, QualityFlag::dilution_not_corrected));
}

TEST(SegmentsMethod, TransmittanceIsTurnedIntoAbsorbance) {
  const auto v = testing::fixed_steps(0.2, 16.0);
  std::vector<double> t;
  for (double a : read_absorbance(v))
    t.push_back(100.0 * std::pow(10.0, -a));
  const Evaluation ev =
      find_endpoints_by_segments(testing::make_curve(v, t, SignalKind::transmittance, kSampleMl));
  ASSERT_EQ(ev.endpoints.size(), 1u);
  EXPECT_NEAR(ev.endpoints[0].volume_ml, kCornerMl, 1e-6);

  t[3] = 0.0;  // a dark reading has no absorbance
  const Evaluation dark =
      find_endpoints_by_segments(testing::make_curve(v, t, SignalKind::transmittance, kSampleMl));
  EXPECT_TRUE(has_flag(dark.flags, QualityFlag::signal_out_of_range));
  ASSERT_EQ(dark.endpoints.size(), 1u);
  EXPECT_NEAR(dark.endpoints[0].volume_ml, kCornerMl, 1e-6);
}

struct Outcome {
  double error_ml;
  double uncertainty_ml;
  bool poor_linearity;
};

std::optional<Outcome> run(std::uint64_t seed, double log10_constant, double step_ml,
                           double noise) {
  std::mt19937_64 rng(seed);
  testing::PhotometricCurveSpec spec;
  spec.noise_sd = noise;
  spec.conditional_constant = std::pow(10.0, log10_constant);
  spec.equivalence_volume_ml = std::uniform_real_distribution<double>(9.5, 10.5)(rng);
  const auto v = testing::fixed_steps(step_ml, 20.0);
  const Evaluation ev = find_endpoints_by_segments(testing::make_curve(
      v, testing::absorbance(spec, v, rng), SignalKind::absorbance, spec.sample_volume_ml));
  if (ev.endpoints.size() != 1)
    return std::nullopt;
  const auto& e = ev.endpoints[0];
  return Outcome{e.volume_ml - spec.equivalence_volume_ml, e.uncertainty_ml,
                 has_flag(e.flags, QualityFlag::poor_linearity)};
}

TEST(SegmentsMethod, SimulatedPhotometricTitration) {
  // K' = 10^8, 0.1 mL steps, absorbance noise 0.001: over 50 seeds the bias
  // stays within 0.05 % and the scatter within 0.3 % of the equivalence
  // volume (the scatter is set by the noise over a rise of 0.15 absorbance).
  std::vector<double> errors;
  for (int seed = 1; seed <= 50; ++seed) {
    const auto o = run(static_cast<std::uint64_t>(seed), 8.0, 0.1, 0.001);
    ASSERT_TRUE(o.has_value()) << seed;
    errors.push_back(100.0 * o->error_ml / 10.0);
  }
  const auto s = testing::stats(errors);
  std::printf("  relative error: bias %.4f %%, sd %.4f %%, max %.4f %%\n", s.mean, s.sd, s.max_abs);
  EXPECT_LT(std::abs(s.mean), 0.05);
  EXPECT_LT(s.sd, 0.3);
}

TEST(SegmentsMethod, UncertaintyIsHonest) {
  // 240 curves: K' from 10^6.5 to 10^8.5 (curved regions of different
  // widths), 0.1 or 0.25 mL steps, noise 0.001 or 0.003.
  int within = 0;
  const int total = 240;
  for (int seed = 1; seed <= total; ++seed) {
    std::mt19937_64 pick(static_cast<std::uint64_t>(5000 + seed));
    const double log_k = std::uniform_real_distribution<double>(6.5, 8.5)(pick);
    const auto o = run(static_cast<std::uint64_t>(seed), log_k, seed % 2 ? 0.1 : 0.25,
                       seed % 4 < 2 ? 0.001 : 0.003);
    ASSERT_TRUE(o.has_value()) << seed;
    if (std::abs(o->error_ml) <= 2.0 * o->uncertainty_ml)
      ++within;
  }
  const double share = static_cast<double>(within) / total;
  std::printf("  errors within 2u: %d of %d (%.1f %%)\n", within, total, 100.0 * share);
  EXPECT_GE(share, 0.90);
  EXPECT_LE(share, 0.98);
}

TEST(SegmentsMethod, StronglyCurvedTitrationIsFlagged) {
  // K' = 10^5 with 2 mM metal: the reaction is far from complete near the
  // equivalence point and no side is straight; most evaluations say so.
  int flagged = 0;
  for (int seed = 1; seed <= 40; ++seed) {
    const auto o = run(static_cast<std::uint64_t>(seed), 5.0, 0.1, 0.001);
    ASSERT_TRUE(o.has_value());
    flagged += o->poor_linearity;
  }
  EXPECT_GE(flagged, 20);
}

TEST(SegmentsMethod, TooFewPoints) {
  const Evaluation ev = find_endpoints_by_segments(testing::make_curve(
      {0.0, 1.0, 2.0, 3.0, 4.0}, {0.1, 0.2, 0.3, 0.3, 0.3}, SignalKind::absorbance, 50.0));
  EXPECT_TRUE(ev.endpoints.empty());
  EXPECT_TRUE(has_flag(ev.flags, QualityFlag::no_endpoint));
  EXPECT_TRUE(has_flag(ev.flags, QualityFlag::few_points_in_segment));
}

TEST(SegmentsMethod, OptionsFromJson) {
  auto ok = segments_options_from_json({{"acceptance_sigma", 4.0}, {"dilution_correction", false}});
  ASSERT_TRUE(ok) << ok.error().message;
  EXPECT_DOUBLE_EQ(ok->acceptance_sigma, 4.0);
  EXPECT_FALSE(ok->dilution_correction);
  EXPECT_EQ(ok->min_points_per_segment, 5);
  auto unknown = segments_options_from_json({{"sigma", 4.0}});
  ASSERT_FALSE(unknown);
  EXPECT_NE(unknown.error().message.find("'sigma'"), std::string::npos);
  EXPECT_FALSE(segments_options_from_json({{"seed_fraction", 0.0}}));
  EXPECT_FALSE(segments_options_from_json({{"min_points_per_segment", 2.5}}));
  auto back = segments_options_from_json(to_json(SegmentsOptions{}));
  EXPECT_TRUE(back);
}

}  // namespace
}  // namespace veq::detection
