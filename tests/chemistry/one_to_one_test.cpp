// Checks of the 1:1 closed form and of the ligand fraction against a published
// worked example, using the book's own constants as inputs.
#include <gtest/gtest.h>

#include <array>
#include <cmath>

#include "chemistry/ligand.hpp"
#include "chemistry/one_to_one.hpp"

namespace veq::chemistry {
namespace {

// EDTA pKa values used by D. C. Harris, Quantitative Chemical Analysis, 8th ed.
// (W. H. Freeman, 2010), Chapter 11 "EDTA Titrations", Section 11-2, for 25 °C
// and ionic strength 0.10 M: 0.0, 1.5, 2.00, 2.69, 6.13, 10.37 (recalled from
// memory; they reproduce the book's alpha(Y4-) = 0.30 at pH 10.00 below).
constexpr std::array<double, 6> kHarrisEdtaPka = {0.0, 1.5, 2.00, 2.69, 6.13, 10.37};

TEST(FullyDeprotonatedFraction, HarrisEdtaAtPh10) {
  // Harris 8th ed., Table 11-1: alpha(Y4-) = 0.30 at pH 10.00 (two printed digits).
  EXPECT_NEAR(fully_deprotonated_fraction(kHarrisEdtaPka, 10.0), 0.30, 0.005);
}

TEST(FullyDeprotonatedFraction, LimitsAndMonotonic) {
  // Invariants: far above the last pKa every ligand is deprotonated; the
  // fraction never decreases with pH; it stays finite (as a logarithm) at pH 0.
  EXPECT_NEAR(fully_deprotonated_fraction(kHarrisEdtaPka, 14.0), 1.0, 1e-3);
  double previous = 0.0;
  for (double ph = 0.0; ph <= 14.0; ph += 0.25) {
    const double a = fully_deprotonated_fraction(kHarrisEdtaPka, ph);
    EXPECT_GE(a, previous);
    previous = a;
  }
  const double log_a0 = log10_fully_deprotonated_fraction(kHarrisEdtaPka, 0.0);
  EXPECT_TRUE(std::isfinite(log_a0));
  // At pH 0 the sum of all six pKa dominates: log alpha ~ -(22.69) + small terms.
  EXPECT_NEAR(log_a0, -22.69, 0.4);
}

TEST(FullyDeprotonatedFraction, MonoproticIsHendersonHasselbalch) {
  // For one acid step, alpha = 1 / (1 + 10^(pKa - pH)): at pH = pKa it is 1/2.
  const std::array<double, 1> pka = {9.25};
  EXPECT_NEAR(fully_deprotonated_fraction(pka, 9.25), 0.5, 1e-12);
  EXPECT_NEAR(fully_deprotonated_fraction(pka, 10.25), 1.0 / 1.1, 1e-12);
}

// Harris 8th ed., Section 11-4 "EDTA Titration Curves": 50.0 mL of 0.0400 M
// Ca2+ buffered at pH 10.00 titrated with 0.0800 M EDTA, with the book's
// K'f = alpha(Y4-) Kf = (0.30)(10^10.65) = 1.34e10 and Ve = 25.0 mL. Printed
// answers (digits recalled from memory, each re-derived by hand from the book's
// own approximations: four fifths of the Ca2+ left at 5.0 mL, [Ca2+] = 0.0291 M;
// x^2 = 0.0267 / K'f at Ve; [Ca2+] = [CaY]/([EDTA] K'f) at 26.0 mL):
// pCa = 1.54 at 5.0 mL, 5.85 at 25.0 mL, 8.73 at 26.0 mL.
OneToOneTitration harris_calcium() {
  OneToOneTitration t;
  t.metal_conc_mol_per_l = 0.0400;
  t.sample_volume_ml = 50.0;
  t.titrant_conc_mol_per_l = 0.0800;
  t.conditional_constant = conditional_formation_constant(10.65, 0.30);
  return t;
}

TEST(OneToOneTitration, HarrisCalciumAtPh10) {
  const auto t = harris_calcium();
  EXPECT_NEAR(t.conditional_constant, 1.34e10, 0.005e10);
  EXPECT_NEAR(equivalence_volume_ml(t), 25.0, 1e-12);
  // Book rounds to two decimals: agree within half a unit of the last digit.
  EXPECT_NEAR(p_metal(t, 5.0), 1.54, 0.005);
  EXPECT_NEAR(p_metal(t, 25.0), 5.85, 0.005);
  EXPECT_NEAR(p_metal(t, 26.0), 8.73, 0.005);
}

TEST(OneToOneTitration, MassBalanceHoldsEverywhere) {
  // Invariant: the free metal m satisfies the combined mass balances
  // K' m^2 + (1 + K'(C_Y - C_M)) m - C_M = 0 to 1e-12 of the largest term,
  // before, at and after the equivalence point.
  const auto t = harris_calcium();
  const double k = t.conditional_constant;
  for (double v = 0.0; v <= 50.0; v += 0.37) {
    const double total = t.sample_volume_ml + v;
    const double c_m = t.metal_conc_mol_per_l * t.sample_volume_ml / total;
    const double c_y = t.titrant_conc_mol_per_l * v / total;
    const double m = free_metal_mol_per_l(t, v);
    ASSERT_GT(m, 0.0);
    ASSERT_LE(m, c_m);
    const double b = 1.0 + k * (c_y - c_m);
    const double scale = k * m * m + std::abs(b * m) + c_m;
    EXPECT_LT(std::abs(k * m * m + b * m - c_m) / scale, 1e-12) << "at " << v << " mL";
  }
}

TEST(OneToOneTitration, RejectsNonsense) {
  auto t = harris_calcium();
  EXPECT_THROW((void)p_metal(t, -1.0), std::invalid_argument);
  EXPECT_THROW((void)p_metal(t, std::nan("")), std::invalid_argument);
  t.conditional_constant = 0.0;
  EXPECT_THROW((void)p_metal(t, 1.0), std::invalid_argument);
}

}  // namespace
}  // namespace veq::chemistry
