// From endpoints to reported results: amounts, units, hardness, replicate
// statistics and the uncertainty budget.
#include "controller/results.hpp"

#include <gtest/gtest.h>

#include <cmath>

namespace veq::controller {
namespace {

TEST(Amounts, DirectBackAndTwoMetal) {
  // 12.34 mL of 0.05 mol/L EDTA (titer 1.0037) less a 0.02 mL blank:
  // 0.05 * 1.0037 * 12.32 / 1000 = 6.182792e-4 mol (by hand).
  TitrantVolume edta{0.05, 1.0037, 12.34, 0.02, 1.0};
  EXPECT_NEAR(analyte_amount_mol(edta).value(), 6.182792e-4, 1e-12);
  // Back-titration: 25.00 mL of 0.05 mol/L EDTA added, the excess takes
  // 8.40 mL of 0.05 mol/L zinc (titer 0.998): 1.25e-3 - 4.19160e-4 =
  // 8.30840e-4 mol of the metal (by hand).
  TitrantVolume excess{0.05, 1.0, 25.00, 0.0, 1.0};
  TitrantVolume zinc{0.05, 0.998, 8.40, 0.0, 1.0};
  EXPECT_NEAR(back_titration_amount_mol(excess, zinc).value(), 8.30840e-4, 1e-12);
  zinc.volume_ml = 26.0;
  auto too_much = back_titration_amount_mol(excess, zinc);
  ASSERT_FALSE(too_much);
  EXPECT_NE(too_much.error().message.find("more than the excess"), std::string::npos);
  // Calcium and magnesium: 14.00 mL at pH 10 for both, 9.00 mL at pH 12
  // for calcium: 0.45 mmol calcium, 0.25 mmol magnesium at 0.05 mol/L.
  auto both = amounts_from_total_and_first({0.05, 1.0, 14.0, 0.0, 1.0}, {0.05, 1.0, 9.0, 0.0, 1.0});
  ASSERT_TRUE(both);
  EXPECT_NEAR(both->first_mol, 4.5e-4, 1e-15);
  EXPECT_NEAR(both->second_mol, 2.5e-4, 1e-15);
  EXPECT_FALSE(
      amounts_from_total_and_first({0.05, 1.0, 9.0, 0.0, 1.0}, {0.05, 1.0, 14.0, 0.0, 1.0}));
  auto nan = analyte_amount_mol({0.05, std::nan(""), 10.0, 0.0, 1.0});
  ASSERT_FALSE(nan);
  EXPECT_NE(nan.error().message.find("titer"), std::string::npos);
}

TEST(Concentrations, EveryUnit) {
  // 6.182792e-4 mol of zinc (65.38 g/mol, IUPAC 2021) in a 50 mL aliquot of
  // a sample diluted 1 + 4 (factor 5): 0.06182792 mol/L, 61.82792 mmol/L,
  // 4042.31 mg/L (by hand).
  const double n = 6.182792e-4;
  SampleSize aliquot{50.0, 0.0, 5.0, 0.0};
  EXPECT_NEAR(concentration(n, aliquot, ResultUnit::mol_per_l).value(), 0.06182792, 1e-12);
  EXPECT_NEAR(concentration(n, aliquot, ResultUnit::mmol_per_l).value(), 61.82792, 1e-9);
  EXPECT_NEAR(concentration(n, aliquot, ResultUnit::mg_per_l, 65.38).value(),
              0.06182792 * 65.38 * 1000.0, 1e-7);
  // Per mass needs a density.
  auto no_density = concentration(n, aliquot, ResultUnit::mass_percent, 65.38);
  ASSERT_FALSE(no_density);
  EXPECT_NE(no_density.error().message.find("density_g_per_ml"), std::string::npos);
  aliquot.density_g_per_ml = 1.05;
  // 50 mL of 1.05 g/mL is 52.5 g: 5 * 6.182792e-4 * 65.38 / 52.5 * 100.
  EXPECT_NEAR(concentration(n, aliquot, ResultUnit::mass_percent, 65.38).value(),
              100.0 * 5.0 * n * 65.38 / 52.5, 1e-12);
  // A weighed sample of 0.2500 g, no dilution: % w/w and mg/kg.
  SampleSize weighed{0.0, 0.25, 1.0, 0.0};
  EXPECT_NEAR(concentration(n, weighed, ResultUnit::mass_percent, 65.38).value(),
              100.0 * n * 65.38 / 0.25, 1e-12);
  EXPECT_NEAR(concentration(n, weighed, ResultUnit::mg_per_kg, 65.38).value(),
              1e6 * n * 65.38 / 0.25, 1e-6);
  EXPECT_FALSE(concentration(n, weighed, ResultUnit::mg_per_l, 65.38));
  EXPECT_FALSE(concentration(n, weighed, ResultUnit::mass_percent));
  EXPECT_FALSE(concentration(n, SampleSize{}, ResultUnit::mol_per_l));
}

TEST(WaterHardnessUnits, Conversions) {
  // 2.5 mmol/L of alkaline earth ions: 250.2 mg/L as CaCO3, 14.02 °dH,
  // 25.02 °f (1 °dH = 0.1783 mmol/L and 1 °f = 0.0999 mmol/L, DIN 38409-6
  // and common use, recalled from memory).
  const WaterHardness h = water_hardness(2.5);
  EXPECT_NEAR(h.mg_per_l_as_caco3, 250.2, 0.05);
  EXPECT_NEAR(h.german_degrees, 2.5 / 0.1783, 0.005);
  EXPECT_NEAR(h.french_degrees, 2.5 / 0.0999, 0.005);
}

TEST(Replicates, StatisticsAndRepeatabilityLimit) {
  // Duplicates 10.12 and 10.18 mg/L: mean 10.15, SD 0.04243, RSD 0.418 %
  // (by hand). With s_r = 0.02 the limit is 2.8 * 0.02 = 0.056 < 0.06
  // (ISO 5725-6:1994, 4.1.4): outside.
  auto d = replicate_statistics({10.12, 10.18}, 0.02);
  ASSERT_TRUE(d);
  EXPECT_NEAR(d->mean, 10.15, 1e-12);
  EXPECT_NEAR(d->sd, 0.06 / std::sqrt(2.0), 1e-12);
  EXPECT_NEAR(d->rsd_percent, 100.0 * 0.06 / std::sqrt(2.0) / 10.15, 1e-9);
  EXPECT_NEAR(*d->repeatability_limit, 0.056, 1e-12);
  EXPECT_FALSE(*d->duplicates_within_limit);
  EXPECT_TRUE(*replicate_statistics({10.12, 10.17}, 0.02)->duplicates_within_limit);
  EXPECT_FALSE(replicate_statistics({}));
  auto bad = replicate_statistics({1.0, std::nan(""), 2.0});
  ASSERT_FALSE(bad);
  EXPECT_NE(bad.error().message.find("replicate 2"), std::string::npos);
}

TEST(Replicates, GrubbsTableAgainstStudentT) {
  // The critical values from the Student t distribution,
  // G = (n - 1)/sqrt(n) sqrt(t^2 / (n - 2 + t^2)), t the upper alpha/(2n)
  // quantile with n - 2 degrees of freedom, computed with Debian's SciPy
  // 1.10 (scipy.stats.t.ppf) when this test was written.
  const double scipy[][2] = {{1.1543, 1.1547}, {1.4812, 1.4962}, {1.7150, 1.7637}, {1.8871, 1.9728},
                             {2.0200, 2.1391}, {2.1266, 2.2744}, {2.2150, 2.3868}, {2.2900, 2.4821},
                             {2.3547, 2.5641}, {2.4116, 2.6357}, {2.4620, 2.6990}, {2.5073, 2.7554},
                             {2.5483, 2.8061}, {2.5857, 2.8521}, {2.6200, 2.8940}, {2.6516, 2.9325},
                             {2.6809, 2.9680}, {2.7082, 3.0008}};
  for (std::size_t n = 3; n <= 20; ++n) {
    const GrubbsCritical c = grubbs_critical(n).value();
    EXPECT_NEAR(c.five_percent, scipy[n - 3][0], 1.5e-3) << n;
    EXPECT_NEAR(c.one_percent, scipy[n - 3][1], 1.5e-3) << n;
  }
  EXPECT_FALSE(grubbs_critical(2));
  EXPECT_FALSE(grubbs_critical(21));
}

TEST(Replicates, GrubbsFindsTheOutlier) {
  // Six results, one far off: mean 10.2167, SD 0.4039; G = (11.04 - 10.2167)
  // / 0.4039 = 2.038 > 1.973 (1 %): an outlier (by hand).
  auto s = replicate_statistics({10.05, 10.02, 10.08, 10.04, 10.07, 11.04});
  ASSERT_TRUE(s);
  ASSERT_TRUE(s->outlier);
  EXPECT_EQ(s->outlier->suspect_index, 5u);
  EXPECT_NEAR(s->outlier->statistic, 2.038, 0.002);
  EXPECT_EQ(s->outlier->verdict, "outlier");
  auto clean = replicate_statistics({10.05, 10.02, 10.08, 10.04, 10.07, 10.06});
  EXPECT_EQ(clean->outlier->verdict, "none");
}

TEST(Uncertainty, EurachemSodiumHydroxideExample) {
  // EURACHEM/CITAC Guide "Quantifying Uncertainty in Analytical
  // Measurement", 3rd ed. (2012), example A2, standardising a sodium
  // hydroxide solution against potassium hydrogen phthalate (values
  // recalled from memory): c = 1000 m P / (M V) with m = 0.3888 g
  // (u 0.00013), P = 1.0 (u 0.00029), M = 204.2212 g/mol (u 0.0038),
  // V = 18.64 mL (u 0.013), repeatability 1.0 (u 0.0005);
  // c = 0.10214 mol/L, u_c = 0.00010 mol/L, U = 0.00020 mol/L (k = 2).
  const double c = 1000.0 * 0.3888 * 1.0 / (204.2212 * 18.64);
  EXPECT_NEAR(c, 0.10214, 5e-6);
  auto b = product_quotient_budget(c, {{"mass of KHP", 0.3888, 0.00013, "balance"},
                                       {"purity of KHP", 1.0, 0.00029, "certificate"},
                                       {"molar mass of KHP", 204.2212, 0.0038, "IUPAC"},
                                       {"titrant volume", 18.64, 0.013, "burette, temperature"},
                                       {"repeatability", 1.0, 0.0005, "replicates"}});
  ASSERT_TRUE(b) << b.error().message;
  EXPECT_NEAR(b->combined_standard, 0.00010, 5e-6);
  EXPECT_NEAR(b->expanded, 0.00020, 1e-5);
  // The volume dominates the budget, as the guide's bar chart shows.
  double largest = 0.0;
  std::string name;
  double total_share = 0.0;
  for (const auto& comp : b->components) {
    total_share += comp.share_percent;
    if (comp.share_percent > largest) {
      largest = comp.share_percent;
      name = comp.name;
    }
  }
  EXPECT_EQ(name, "titrant volume");
  EXPECT_NEAR(total_share, 100.0, 1e-9);
  EXPECT_FALSE(product_quotient_budget(c, {{"zero", 0.0, 0.1, ""}}));
  EXPECT_FALSE(product_quotient_budget(c, {{"negative", 1.0, -0.1, ""}}));
}

TEST(Uncertainty, NetVolume) {
  // A 20 mL burette's 40 µL systematic limit as a rectangular distribution
  // (0.040/sqrt(3) = 0.023094 mL), an endpoint uncertainty of 0.010 mL and
  // a blank of 0.005 mL: sqrt(0.023094^2 + 0.01^2 + 0.005^2) = 0.025660 mL
  // (by hand).
  EXPECT_NEAR(net_volume_uncertainty_ml(0.040, 0.010, 0.005), 0.025660, 2e-6);
}

}  // namespace
}  // namespace veq::controller
