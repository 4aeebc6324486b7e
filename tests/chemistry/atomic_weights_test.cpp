// Molar masses from the IUPAC standard atomic weights.
#include "chemistry/atomic_weights.hpp"

#include <gtest/gtest.h>

namespace veq::chemistry {
namespace {

TEST(AtomicWeights, ElementsOfTheIupacTable) {
  // IUPAC standard atomic weights 2021 (recalled from memory): calcium
  // 40.078(4), zinc 65.38(2), copper 63.546(3), nickel 58.6934(4),
  // magnesium conventional value 24.305.
  EXPECT_NEAR(atomic_weight_g_per_mol("Ca").value(), 40.078, 1e-9);
  EXPECT_NEAR(atomic_weight_g_per_mol("Zn").value(), 65.38, 1e-9);
  EXPECT_NEAR(atomic_weight_g_per_mol("Cu").value(), 63.546, 1e-9);
  EXPECT_NEAR(atomic_weight_g_per_mol("Ni").value(), 58.6934, 1e-9);
  EXPECT_NEAR(atomic_weight_g_per_mol("Mg").value(), 24.305, 1e-9);
  EXPECT_FALSE(atomic_weight_g_per_mol("Xx"));
}

TEST(AtomicWeights, PrimaryStandardsAndTitrants) {
  // Calcium carbonate, 100.09 g/mol; disodium EDTA dihydrate
  // Na2H2Y·2H2O = C10H14N2Na2O8·2H2O, 372.24 g/mol (D. A. Skoog et al.,
  // Fundamentals of Analytical Chemistry, 9th ed., chapter 17, the EDTA
  // preparation example; recalled from memory).
  EXPECT_NEAR(molar_mass_g_per_mol("CaCO3").value(), 100.09, 0.005);
  EXPECT_NEAR(molar_mass_g_per_mol("C10H14N2Na2O8.2H2O").value(), 372.24, 0.005);
  EXPECT_NEAR(molar_mass_g_per_mol("C10H14N2Na2O8\xC2\xB7"
                                   "2H2O")
                  .value(),
              372.24, 0.005);
  // Magnesium sulfate heptahydrate 246.47 g/mol and ammonium sulfate
  // 132.14 g/mol (CRC Handbook of Chemistry and Physics, physical constants
  // of inorganic compounds; recalled from memory). The handbook's atomic
  // weights predate the 2021 table by a few thousandths of a g/mol (H
  // 1.00794 then, 1.008 now), hence 0.01.
  EXPECT_NEAR(molar_mass_g_per_mol("MgSO4·7H2O").value(), 246.47, 0.01);
  EXPECT_NEAR(molar_mass_g_per_mol("(NH4)2SO4").value(), 132.14, 0.01);
}

TEST(AtomicWeights, BadFormulasNameThePosition) {
  auto unknown = molar_mass_g_per_mol("CaQo3");
  ASSERT_FALSE(unknown);
  EXPECT_NE(unknown.error().message.find("position 3"), std::string::npos)
      << unknown.error().message;
  EXPECT_NE(unknown.error().message.find("unknown element 'Qo'"), std::string::npos);
  auto open = molar_mass_g_per_mol("(NH4SO4");
  ASSERT_FALSE(open);
  EXPECT_NE(open.error().message.find("'(' without its ')'"), std::string::npos)
      << open.error().message;
  auto close = molar_mass_g_per_mol("NH4)2");
  ASSERT_FALSE(close);
  EXPECT_NE(close.error().message.find("position 4"), std::string::npos) << close.error().message;
  EXPECT_FALSE(molar_mass_g_per_mol("H0O"));
  EXPECT_FALSE(molar_mass_g_per_mol(""));
  EXPECT_FALSE(molar_mass_g_per_mol("ca"));
  EXPECT_FALSE(molar_mass_g_per_mol("CaCO3."));
}

}  // namespace
}  // namespace veq::chemistry
