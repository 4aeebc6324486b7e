// The general equilibrium solver against published tables and worked examples
// (each check names its source and uses the source's own constants as inputs),
// its invariants (mass and charge balance, Kw, independence of the starting
// point, agreement with the 1:1 closed form) and its robustness.
#include "chemistry/equilibrium.hpp"

#include <gtest/gtest.h>

#include <array>
#include <cmath>
#include <random>
#include <string>
#include <vector>

#include "chemistry/ligand.hpp"
#include "chemistry/one_to_one.hpp"

namespace veq::chemistry {
namespace {

// "H2Y" from ("H", 2, "Y"), built piecewise: g++ 12 warns falsely (-Wrestrict)
// on "literal" + std::string temporaries.
std::string numbered(const char* prefix, int n, const char* suffix) {
  std::string name = prefix;
  name += std::to_string(n);
  name += suffix;
  return name;
}

// H+, one metal (charge 2) and a tetraprotic-to-hexaprotic ligand Y4- whose
// protonation constants are given as pKa values; species OH-, HnY and MY.
ChemicalSystem metal_edta_system(const std::vector<double>& pka_descending, double log10_kf,
                                 double log10_kw = -14.0) {
  ChemicalSystem s;
  s.components = {{"H+", 1}, {"M", 2}, {"Y", -4}};
  s.proton = 0;
  s.species.push_back({"OH-", {-1, 0, 0}, log10_kw, 0.0});
  double cumulative = 0.0;
  for (std::size_t n = 1; n <= pka_descending.size(); ++n) {
    cumulative += pka_descending[n - 1];
    s.species.push_back(
        {numbered("H", static_cast<int>(n), "Y"), {static_cast<int>(n), 0, 1}, cumulative});
  }
  s.species.push_back({"MY", {0, 1, 1}, log10_kf});
  return s;
}

double free_ligand_fraction(EquilibriumSolver& solver, double ph) {
  Conditions c;
  c.total_mol_per_l = {0.0, 0.0, 0.01};
  c.ph = ph;
  auto r = solver.solve(c);
  EXPECT_TRUE(r.has_value()) << (r ? "" : r.error().message);
  return r ? r->free_mol_per_l[2] / 0.01 : std::nan("");
}

TEST(EquilibriumSolver, EdtaSideReactionCoefficientMatchesRingbom) {
  // A. Ringbom, Complexation in Analytical Chemistry (Interscience, 1963), table
  // of log alpha_Y(H) for EDTA, computed by Ringbom from pKa 2.0, 2.67, 6.16,
  // 10.26 (20 degC, I = 0.1). Printed values recalled from memory (two decimals):
  const std::vector<double> pka = {10.26, 6.16, 2.67, 2.0};
  const std::array<double, 12> log_alpha = {17.13, 13.44, 10.60, 8.44, 6.45, 4.65,
                                            3.32,  2.27,  1.28,  0.45, 0.07, 0.01};
  auto solver = EquilibriumSolver::create(metal_edta_system(pka, 10.0));
  ASSERT_TRUE(solver.has_value());
  for (int ph = 1; ph <= 12; ++ph) {
    const double fraction = free_ligand_fraction(*solver, ph);
    EXPECT_NEAR(-std::log10(fraction), log_alpha[static_cast<std::size_t>(ph - 1)], 0.006)
        << "pH " << ph;
  }
}

TEST(EquilibriumSolver, EdtaFullyDeprotonatedFractionMatchesHarrisTable) {
  // D. C. Harris, Quantitative Chemical Analysis, 8th ed. (2010), Table 11-1,
  // alpha(Y4-) for EDTA at 25 degC and I = 0.10 M from pKa 0.0, 1.5, 2.00, 2.69,
  // 6.13, 10.37. Printed values (two significant digits) recalled from memory.
  const std::vector<double> pka = {10.37, 6.13, 2.69, 2.00, 1.5, 0.0};
  const std::array<double, 14> alpha = {1.4e-18, 2.6e-14, 2.1e-11, 3.0e-9, 2.9e-7, 1.8e-5, 3.8e-4,
                                        4.2e-3,  0.041,   0.30,    0.81,   0.98,   1.00,   1.00};
  auto solver = EquilibriumSolver::create(metal_edta_system(pka, 10.0));
  ASSERT_TRUE(solver.has_value());
  for (int ph = 1; ph <= 14; ++ph) {
    const double expected = alpha[static_cast<std::size_t>(ph - 1)];
    const double fraction = free_ligand_fraction(*solver, ph);
    // Half a unit in the second printed digit.
    EXPECT_NEAR(fraction / expected, 1.0,
                0.05 / (expected / std::pow(10.0, std::floor(std::log10(expected)))))
        << "pH " << ph;
    // And the same as the closed form of chemistry/ligand.hpp to rounding.
    EXPECT_NEAR(fraction / fully_deprotonated_fraction(pka, ph), 1.0, 1e-9) << "pH " << ph;
  }
}

// Harris 8th ed., Section 11-4: 50.0 mL of 0.0400 M Ca2+ at pH 10.00 titrated
// with 0.0800 M EDTA, log Kf(CaY) = 10.65; the book's pCa (recalled from memory,
// see one_to_one_test.cpp): 1.54 at 5.0 mL, 5.85 at 25.0 mL, 8.73 at 26.0 mL.
TEST(EquilibriumSolver, HarrisCalciumCurveThroughGeneralSolver) {
  const std::vector<double> pka = {10.37, 6.13, 2.69, 2.00, 1.5, 0.0};
  auto solver = EquilibriumSolver::create(metal_edta_system(pka, 10.65));
  ASSERT_TRUE(solver.has_value());
  auto pca = [&](double added_ml) {
    const double total_ml = 50.0 + added_ml;
    Conditions c;
    c.total_mol_per_l = {0.0, 0.0400 * 50.0 / total_ml, 0.0800 * added_ml / total_ml};
    c.ph = 10.0;
    auto r = solver->solve(c);
    EXPECT_TRUE(r.has_value());
    return r ? -std::log10(r->free_mol_per_l[1]) : std::nan("");
  };
  EXPECT_NEAR(pca(5.0), 1.54, 0.005);
  EXPECT_NEAR(pca(25.0), 5.85, 0.005);
  EXPECT_NEAR(pca(26.0), 8.73, 0.005);
}

TEST(EquilibriumSolver, AgreesWithOneToOneClosedForm) {
  // Invariant: with only H+ side reactions of the ligand, the general solver and
  // the closed form with K' = alpha(Y4-) Kf are the same model; they agree to
  // rounding before, at and after the equivalence point.
  const std::vector<double> pka = {10.37, 6.13, 2.69, 2.00, 1.5, 0.0};
  auto solver = EquilibriumSolver::create(metal_edta_system(pka, 10.65));
  ASSERT_TRUE(solver.has_value());
  OneToOneTitration t;
  t.metal_conc_mol_per_l = 0.0400;
  t.sample_volume_ml = 50.0;
  t.titrant_conc_mol_per_l = 0.0800;
  t.conditional_constant =
      conditional_formation_constant(10.65, fully_deprotonated_fraction(pka, 10.0));
  Speciation previous;
  for (double v = 0.25; v <= 50.0; v += 0.25) {
    const double total_ml = 50.0 + v;
    Conditions c;
    c.total_mol_per_l = {0.0, 0.0400 * 50.0 / total_ml, 0.0800 * v / total_ml};
    c.ph = 10.0;
    Speciation s;
    auto r = previous.log10_free.empty() ? solver->solve(c, s) : solver->solve_from(c, previous, s);
    ASSERT_TRUE(r.has_value()) << r.error().message;
    EXPECT_NEAR(-std::log10(s.free_mol_per_l[1]), p_metal(t, v), 1e-8) << v << " mL";
    previous = s;
  }
}

// A system with proton balance, two metals, hydroxo species and spectator ions
// for the charge balance: Zn(NO3)2 and Mg(NO3)2 with Na2H2Y, NH3 and NH4Cl.
struct BufferedSample {
  ChemicalSystem system;
  Conditions conditions;
  double spectator_charge_mol_per_l = 0.0;  // Na+ - NO3- - Cl-
};

BufferedSample buffered_sample() {
  BufferedSample b;
  auto& s = b.system;
  s.components = {{"H+", 1}, {"Zn", 2}, {"Mg", 2}, {"Y", -4}, {"NH3", 0}};
  s.proton = 0;
  // Constants: EDTA and NH4+ as in Harris 8th ed.; Zn-NH3 from Harris Section
  // 11-5; hydrolysis from Baes and Mesmer (1976). All recalled from memory; the
  // checks below are invariants and do not depend on the exact values.
  s.species = {{"OH-", {-1, 0, 0, 0, 0}, -14.0, 0.0},     {"HY", {1, 0, 0, 1, 0}, 10.37, 0.1},
               {"H2Y", {2, 0, 0, 1, 0}, 16.50, 0.1},      {"H3Y", {3, 0, 0, 1, 0}, 19.19, 0.1},
               {"H4Y", {4, 0, 0, 1, 0}, 21.19, 0.1},      {"NH4+", {1, 0, 0, 0, 1}, 9.24, 0.0},
               {"ZnY", {0, 1, 0, 1, 0}, 16.5, 0.1},       {"MgY", {0, 0, 1, 1, 0}, 8.79, 0.1},
               {"ZnOH", {-1, 1, 0, 0, 0}, -8.96, 0.0},    {"Zn(OH)3", {-3, 1, 0, 0, 0}, -28.4, 0.0},
               {"Zn(OH)4", {-4, 1, 0, 0, 0}, -41.2, 0.0}, {"MgOH", {-1, 0, 1, 0, 0}, -11.44, 0.0},
               {"ZnNH3", {0, 1, 0, 0, 1}, 2.18, 0.1},     {"Zn(NH3)2", {0, 1, 0, 0, 2}, 4.43, 0.1},
               {"Zn(NH3)3", {0, 1, 0, 0, 3}, 6.74, 0.1},  {"Zn(NH3)4", {0, 1, 0, 0, 4}, 8.70, 0.1}};
  const double zn = 0.002, mg = 0.001, edta = 0.0025, nh3 = 0.1, nh4cl = 0.02;
  // Proton excess over the reference state (Y4-, NH3, water): 2 per H2Y2-, 1 per NH4+.
  b.conditions.total_mol_per_l = {2.0 * edta + nh4cl, zn, mg, edta, nh3 + nh4cl};
  b.spectator_charge_mol_per_l = 2.0 * edta - 2.0 * (zn + mg) - nh4cl;
  return b;
}

void expect_balanced(const ChemicalSystem& system, const Conditions& c, const Speciation& s) {
  for (std::size_t j = 0; j < system.components.size(); ++j) {
    if (static_cast<int>(j) == system.proton && c.ph)
      continue;
    const double sum = component_sum_mol_per_l(system, s, static_cast<int>(j));
    // Relative to the total, or for the proton (whose excess may be near 0) to
    // the sum of the magnitudes of the terms: the solver's own measure.
    double magnitude = s.free_mol_per_l[j];
    for (std::size_t i = 0; i < system.species.size(); ++i) {
      magnitude += std::abs(system.species[i].stoichiometry[j] * s.species_mol_per_l[i]);
    }
    const double scale = std::max(std::abs(c.total_mol_per_l[j]), 0.5 * magnitude);
    EXPECT_LE(std::abs(sum - c.total_mol_per_l[j]), 1.0001e-10 * scale)
        << system.components[j].name;
  }
}

TEST(EquilibriumSolver, MassChargeBalanceAndKwWithProtonBalance) {
  auto b = buffered_sample();
  auto solver = EquilibriumSolver::create(b.system);
  ASSERT_TRUE(solver.has_value());
  auto r = solver->solve(b.conditions);
  ASSERT_TRUE(r.has_value()) << r.error().message;
  expect_balanced(b.system, b.conditions, *r);
  EXPECT_LE(r->max_relative_residual, 1e-10);
  // Charge balance follows from the proton balance of an electroneutral recipe.
  const double charge = charge_sum_mol_per_l(b.system, *r) + b.spectator_charge_mol_per_l;
  EXPECT_NEAR(charge, 0.0, 1e-12);
  // Kw: [H+][OH-] = 10^-14 (the constant given to the system).
  const double oh = r->species_mol_per_l[0];
  EXPECT_NEAR(std::log10(r->free_mol_per_l[0] * oh), -14.0, 1e-9);
  // Henderson-Hasselbalch check: all 2.5 mM H2Y2- is bound (by Zn, then Mg) and
  // releases 5 mM H+ into the 0.1 M NH3 / 0.02 M NH4+ buffer, so
  // pH = 9.24 + log10(0.095 / 0.025) = 9.82 (free Mg2+ and minor species shift it
  // by about 0.002).
  EXPECT_NEAR(r->ph, 9.24 + std::log10(0.095 / 0.025), 0.01);
}

TEST(EquilibriumSolver, DaviesCorrectionKeepsThermodynamicKw) {
  // With an activity correction, a(H+) a(OH-) = Kw at I = 0 must hold at any I:
  // the solver moves the constant given at I = 0 to the sample's ionic strength.
  auto b = buffered_sample();
  auto solver = EquilibriumSolver::create(b.system);
  ASSERT_TRUE(solver.has_value());
  b.conditions.ionic_strength_mol_per_l = 0.1;
  auto r = solver->solve(b.conditions);
  ASSERT_TRUE(r.has_value()) << r.error().message;
  expect_balanced(b.system, b.conditions, *r);
  const double log_gamma1 = davies_log10_activity_coefficient(1, 0.1);
  const double log_a_h = std::log10(r->free_mol_per_l[0]) + log_gamma1;
  const double log_a_oh = std::log10(r->species_mol_per_l[0]) + log_gamma1;
  EXPECT_NEAR(log_a_h + log_a_oh, -14.0, 1e-9);
  EXPECT_NEAR(r->ph, -log_a_h, 1e-12);
  // Davies at I = 0.1 for z = 1: -0.509 (0.3162/1.3162 - 0.03) = -0.1070.
  EXPECT_NEAR(log_gamma1, -0.1070, 5e-5);
}

TEST(EquilibriumSolver, SameAnswerFromDifferentStartingPoints) {
  auto b = buffered_sample();
  auto solver = EquilibriumSolver::create(b.system);
  ASSERT_TRUE(solver.has_value());
  auto reference = solver->solve(b.conditions);
  ASSERT_TRUE(reference.has_value());
  std::mt19937 rng(7);
  std::uniform_real_distribution<double> shift(-12.0, 12.0);
  for (int k = 0; k < 50; ++k) {
    Speciation start = *reference;
    for (double& v : start.log10_free)
      v += shift(rng);
    Speciation s;
    auto r = solver->solve_from(b.conditions, start, s);
    ASSERT_TRUE(r.has_value()) << r.error().message;
    for (std::size_t j = 0; j < s.log10_free.size(); ++j) {
      EXPECT_NEAR(s.log10_free[j], reference->log10_free[j], 1e-9) << "start " << k;
    }
  }
}

TEST(EquilibriumSolver, RejectsBadInputWithReasons) {
  auto b = buffered_sample();
  auto solver = EquilibriumSolver::create(b.system);
  ASSERT_TRUE(solver.has_value());
  Conditions c = b.conditions;
  c.total_mol_per_l[1] = -1e-3;
  auto r = solver->solve(c);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::invalid_input);
  EXPECT_NE(r.error().message.find("'Zn'"), std::string::npos) << r.error().message;
  c = b.conditions;
  c.total_mol_per_l[3] = std::nan("");
  r = solver->solve(c);
  ASSERT_FALSE(r.has_value());
  EXPECT_NE(r.error().message.find("'Y'"), std::string::npos) << r.error().message;
  c = b.conditions;
  c.ph = 30.0;
  EXPECT_FALSE(solver->solve(c).has_value());
  c.total_mol_per_l.pop_back();
  EXPECT_FALSE(solver->solve(c).has_value());

  // A species with a negative metal coefficient is not a valid system.
  auto bad = b.system;
  bad.species[6].stoichiometry[1] = -1;
  auto created = EquilibriumSolver::create(bad);
  ASSERT_FALSE(created.has_value());
  EXPECT_NE(created.error().message.find("ZnY"), std::string::npos);

  // Too few iterations: a no_convergence error that describes the system.
  SolverOptions tight;
  tight.max_iterations = 1;
  auto limited = EquilibriumSolver::create(b.system, tight);
  ASSERT_TRUE(limited.has_value());
  r = limited->solve(b.conditions);
  ASSERT_FALSE(r.has_value());
  EXPECT_EQ(r.error().kind, ErrorKind::no_convergence);
  EXPECT_NE(r.error().message.find("Zn 0.002 mol/L"), std::string::npos) << r.error().message;
  EXPECT_NE(r.error().message.find("still off by"), std::string::npos) << r.error().message;
}

TEST(EquilibriumSolver, ThousandsOfRandomSystemsConvergeOrAreRejected) {
  // Robustness: random systems across pH 0-14 (fixed, or from a proton excess of
  // either sign), log K 0-30 and totals 1e-9..1 mol/L, with polyprotic ligands,
  // 1:2 and 2:1 complexes, protonated complexes, hydroxo and dinuclear hydroxo
  // species. Each must converge (verified balances) or fail with a reason.
  std::mt19937_64 rng(20240601);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  auto log_uniform = [&](double lo, double hi) { return std::pow(10.0, lo + (hi - lo) * u(rng)); };
  int converged = 0;
  int rejected = 0;
  const int trials = 3000;
  for (int t = 0; t < trials; ++t) {
    ChemicalSystem s;
    s.components = {{"H+", 1}, {"M", 2}, {"N", 3}, {"L", -4}, {"A", 0}};
    s.proton = 0;
    auto add = [&](std::string name, std::vector<int> st, double lb) {
      s.species.push_back({std::move(name), std::move(st), lb, 0.0});
    };
    add("OH", {-1, 0, 0, 0, 0}, -14.0);
    double cumulative = 0.0;
    const int protons = 1 + static_cast<int>(rng() % 6);
    for (int k = 1; k <= protons; ++k) {
      cumulative += 14.0 * u(rng) / k;
      add(numbered("H", k, "L"), {k, 0, 0, 1, 0}, cumulative);
    }
    add("HA", {1, 0, 0, 0, 1}, 14.0 * u(rng));
    add("ML", {0, 1, 0, 1, 0}, 30.0 * u(rng));
    add("NL", {0, 0, 1, 1, 0}, 30.0 * u(rng));
    add("MHL", {1, 1, 0, 1, 0}, 30.0 * u(rng));
    add("ML2", {0, 1, 0, 2, 0}, 30.0 * u(rng));
    add("M2L", {0, 2, 0, 1, 0}, 30.0 * u(rng));
    double c2 = 0.0;
    for (int k = 1; k <= 4; ++k) {
      c2 += 5.0 * u(rng);
      add(numbered("MA", k, ""), {0, 1, 0, 0, k}, c2);
    }
    add("MOH", {-1, 1, 0, 0, 0}, -14.0 * u(rng));
    add("M(OH)2", {-2, 1, 0, 0, 0}, -30.0 * u(rng));
    add("N2(OH)2", {-2, 0, 2, 0, 0}, -10.0 * u(rng));
    add("N(OH)4", {-4, 0, 1, 0, 0}, -30.0 * u(rng));
    auto solver = EquilibriumSolver::create(s);
    ASSERT_TRUE(solver.has_value()) << solver.error().message;
    Conditions c;
    c.total_mol_per_l = {0.0, log_uniform(-9, 0), log_uniform(-9, 0), log_uniform(-9, 0),
                         u(rng) < 0.3 ? 0.0 : log_uniform(-9, 0)};
    if (u(rng) < 0.5) {
      c.ph = 14.0 * u(rng);
    } else {
      c.total_mol_per_l[0] = (u(rng) < 0.5 ? -1.0 : 1.0) * log_uniform(-9, 0);
    }
    Speciation out;
    auto r = solver->solve(c, out);
    if (r) {
      ++converged;
      ASSERT_LE(out.max_relative_residual, 1e-10);
      expect_balanced(s, c, out);
    } else {
      ++rejected;
      EXPECT_FALSE(r.error().message.empty());
    }
  }
  // Every one of these systems is physically valid, so all must converge.
  EXPECT_EQ(converged, trials) << rejected << " rejected";
}

}  // namespace
}  // namespace veq::chemistry
