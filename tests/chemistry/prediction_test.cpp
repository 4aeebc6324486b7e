// Conditional constants, the chelate effect, predicted curves, breaks,
// indicator endpoints and feasibility, checked against textbook worked examples
// (each names its source and uses the book's constants) and against invariants.
#include "chemistry/prediction.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <string>
#include <vector>

#include "chemistry/conditional.hpp"
#include "chemistry/constants.hpp"
#include "chemistry/equilibrium.hpp"
#include "chemistry/sample.hpp"

namespace veq::chemistry {
namespace {

// Constants exactly as printed in D. C. Harris, Quantitative Chemical Analysis,
// 8th ed. (2010), Chapter 11 (values recalled from memory): EDTA pKa 0.0, 1.5,
// 2.00, 2.69, 6.13, 10.37 (Section 11-2); log Kf CaY 10.65 and ZnY 16.50
// (Table 11-2); Zn-NH3 log beta 2.18, 4.43, 6.74, 8.70 and NH4+ pKa 9.24
// (Section 11-5). No hydrolysis and no protonated complexes: the book leaves them out.
constexpr const char* kHarrisLibrary = R"({
  "sources": {"harris8": "D. C. Harris, Quantitative Chemical Analysis, 8th ed., 2010"},
  "water": {"log10_beta": -14.0, "temperature_c": 25, "ionic_strength_mol_per_l": 0, "source": "harris8", "recalled_from_memory": true},
  "metals": [{"name": "Ca", "charge": 2}, {"name": "Zn", "charge": 2}, {"name": "Mg", "charge": 2}],
  "ligands": [
    {"name": "EDTA", "charge": -4, "role": "titrant",
     "protonation": [
       {"protons": 1, "log10_beta": 10.37, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"protons": 2, "log10_beta": 16.50, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"protons": 3, "log10_beta": 19.19, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"protons": 4, "log10_beta": 21.19, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"protons": 5, "log10_beta": 22.69, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"protons": 6, "log10_beta": 22.69, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true}],
     "complexes": [
       {"metal": "Ca", "log10_beta": 10.65, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"metal": "Zn", "log10_beta": 16.50, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"metal": "Mg", "log10_beta": 8.79, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true}]},
    {"name": "ammonia", "charge": 0, "role": "auxiliary",
     "protonation": [{"protons": 1, "log10_beta": 9.24, "temperature_c": 25, "ionic_strength_mol_per_l": 0, "source": "harris8", "recalled_from_memory": true}],
     "complexes": [
       {"metal": "Zn", "ligands": 1, "log10_beta": 2.18, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"metal": "Zn", "ligands": 2, "log10_beta": 4.43, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"metal": "Zn", "ligands": 3, "log10_beta": 6.74, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true},
       {"metal": "Zn", "ligands": 4, "log10_beta": 8.70, "temperature_c": 25, "ionic_strength_mol_per_l": 0.1, "source": "harris8", "recalled_from_memory": true}]}
  ]})";

ConstantsLibrary harris_library() {
  auto lib = ConstantsLibrary::parse(kHarrisLibrary);
  EXPECT_TRUE(lib.has_value()) << (lib ? "" : lib.error().message);
  return *lib;
}

ConstantsLibrary builtin() {
  auto lib = builtin_constants_library();
  EXPECT_TRUE(lib.has_value()) << (lib ? "" : lib.error().message);
  return *lib;
}

TEST(ConditionalConstant, HarrisZincInAmmoniaBuffer) {
  // Harris 8th ed., Section 11-5 "Auxiliary complexing agents": Zn2+ at pH 10.00
  // in 0.10 M free NH3. The book prints alpha(Zn2+) = 1.8e-5 and the conditional
  // constant K''f = alpha(Zn2+) alpha(Y4-) Kf = 1.7e11 (recalled from memory).
  const auto lib = harris_library();
  const std::vector<FreeLigand> ammonia = {{"ammonia", 0.10}};
  auto log_alpha = log10_metal_side_reaction(lib, "Zn", 10.0, ammonia, false);
  ASSERT_TRUE(log_alpha.has_value());
  EXPECT_NEAR(std::pow(10.0, -*log_alpha), 1.8e-5, 0.05e-5);
  const double log_alpha_y = log10_proton_side_reaction(*lib.find_ligand("EDTA"), 10.0);
  EXPECT_NEAR(std::pow(10.0, -log_alpha_y), 0.30, 0.005);  // Harris Table 11-1
  const double k2 = std::pow(10.0, 16.50 - *log_alpha - log_alpha_y);
  EXPECT_NEAR(k2, 1.7e11, 0.05e11);
  // The same through conditional_constant(), which takes the ammonia total and
  // works out the free NH3 as total / alpha_NH3(H).
  const double total = 0.10 * (1.0 + std::pow(10.0, 9.24 - 10.0));
  const std::vector<LigandTotal> totals = {{"ammonia", total}};
  auto k = conditional_constant(lib, "Zn", "EDTA", 10.0, totals, false);
  ASSERT_TRUE(k.has_value());
  EXPECT_NEAR(k->log10_alpha_metal, *log_alpha, 1e-12);
  EXPECT_NEAR(k->log10_conditional, std::log10(k2), 1e-12);
}

TEST(ConditionalConstant, HarrisZincTitrationPointThroughGeneralSolver) {
  // Harris 8th ed., Section 11-5: 50.0 mL of 1.00e-3 M Zn2+ titrated with
  // 1.00e-3 M EDTA at pH 10.00 in 0.10 M NH3. Before the equivalence point the
  // book takes [Zn2+] = alpha(Zn2+) C_Zn; at 20.0 mL that gives pZn = 8.11
  // (re-derived by hand from the book's method and rounded alpha = 1.8e-5).
  // The general solver, with the ammonia total set so that free NH3 is 0.10 M,
  // must agree to the book's rounding.
  const auto lib = harris_library();
  SystemRecipe recipe;
  recipe.metals = {"Zn"};
  recipe.ligands = {"EDTA", "ammonia"};
  auto system = build_system(lib, recipe);
  ASSERT_TRUE(system.has_value()) << system.error().message;
  auto solver = EquilibriumSolver::create(*system);
  ASSERT_TRUE(solver.has_value());
  const double zn = 1.00e-3 * 50.0 / 70.0, y = 1.00e-3 * 20.0 / 70.0;
  const double alpha_nh3 = 1.0 + std::pow(10.0, 9.24 - 10.0);
  Conditions c;
  c.ph = 10.0;
  c.total_mol_per_l = {0.0, zn, y, 0.10 * alpha_nh3};
  Speciation s;
  for (int k = 0; k < 10; ++k) {  // adjust the total until free NH3 = 0.10 M
    ASSERT_TRUE(solver->solve(c, s).has_value());
    c.total_mol_per_l[3] += (0.10 - s.free_mol_per_l[3]) * alpha_nh3;
  }
  ASSERT_TRUE(solver->solve(c, s).has_value());
  EXPECT_NEAR(s.free_mol_per_l[3], 0.10, 1e-9);
  EXPECT_NEAR(-std::log10(s.free_mol_per_l[1]), 8.11, 0.01);
}

// The chelate effect. C. E. Housecroft and A. G. Sharpe, Inorganic Chemistry
// (Pearson), section on the chelate effect, compare Ni2+ with six NH3 against
// three ethylenediamine (six N donors each): log beta6 [Ni(NH3)6]2+ = 8.61 and
// log beta3 [Ni(en)3]2+ = 18.28 (recalled from memory). With 1.0e-4 M Ni2+ and
// 1.2e-3 M N donors (ligands unprotonated, overall constants only, as in the
// book's comparison), the fraction of nickel in the fully coordinated complex.
double full_complex_fraction(int n, double log_beta, double ligand_total) {
  ChemicalSystem s;
  s.components = {{"Ni", 2}, {"L", 0}};
  std::vector<int> st = {1, n};
  s.species.push_back({"NiLn", st, log_beta, 0.0});
  auto solver = EquilibriumSolver::create(s);
  EXPECT_TRUE(solver.has_value());
  Conditions c;
  c.total_mol_per_l = {1.0e-4, ligand_total};
  auto r = solver->solve(c);
  EXPECT_TRUE(r.has_value()) << (r ? "" : r.error().message);
  return r ? r->species_mol_per_l[0] / 1.0e-4 : std::nan("");
}

// Independent reference: bisection on the bound fraction f of
// f = b L^n / (1 + b L^n), L = L_T - n f M_T.
double bisection_fraction(int n, double log_beta, double ligand_total) {
  double lo = 0.0, hi = 1.0;
  for (int k = 0; k < 200; ++k) {
    const double f = 0.5 * (lo + hi);
    const double l = ligand_total - n * f * 1.0e-4;
    const double x = std::pow(10.0, log_beta) * std::pow(l, n);
    (x / (1.0 + x) > f ? lo : hi) = f;
  }
  return 0.5 * (lo + hi);
}

TEST(ChelateEffect, NickelAmmoniaAgainstEthylenediamine) {
  const double ammine = full_complex_fraction(6, 8.61, 1.2e-3);
  const double chelate = full_complex_fraction(3, 18.28, 0.6e-3);
  EXPECT_NEAR(ammine / bisection_fraction(6, 8.61, 1.2e-3), 1.0, 1e-8);
  EXPECT_NEAR(chelate / bisection_fraction(3, 18.28, 0.6e-3), 1.0, 1e-8);
  EXPECT_GT(chelate, 0.99);                      // essentially all nickel as [Ni(en)3]2+
  EXPECT_LT(ammine, 1e-8);                       // almost none as [Ni(NH3)6]2+
  EXPECT_GT(std::log10(chelate / ammine), 8.0);  // orders of magnitude apart
}

SampleComposition harris_calcium_sample() {
  SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Ca", 0.0400}};
  s.ph = 10.0;
  s.titrant = {"EDTA", 0.0800, 2.0};
  s.curve.end_volume_ml = 50.0;
  s.curve.points = 201;  // 0.25 mL apart: 5.0, 25.0 and 26.0 mL are points
  return s;
}

TEST(Prediction, HarrisCalciumCurveBreakAndClosedForm) {
  // Harris 8th ed., Section 11-4 (see one_to_one_test.cpp): pCa 1.54 at 5.0 mL,
  // 5.85 at 25.0 mL, 8.73 at 26.0 mL (recalled from memory).
  const auto lib = harris_library();
  auto p = predict(lib, harris_calcium_sample());
  ASSERT_TRUE(p.has_value()) << p.error().message;
  EXPECT_TRUE(p->closed_form_used);
  ASSERT_EQ(p->curve.size(), 201u);
  EXPECT_NEAR(p->curve[20].volume_ml, 5.0, 1e-12);
  EXPECT_NEAR(p->curve[20].signal, 1.54, 0.005);
  EXPECT_NEAR(p->curve[100].signal, 5.85, 0.005);
  EXPECT_NEAR(p->curve[104].signal, 8.73, 0.005);
  // The general engine gives the same curve as the closed-form fast path.
  PredictionOptions general;
  general.closed_form = false;
  auto g = predict(lib, harris_calcium_sample(), general);
  ASSERT_TRUE(g.has_value()) << g.error().message;
  EXPECT_FALSE(g->closed_form_used);
  for (std::size_t k = 1; k < p->curve.size(); ++k) {
    EXPECT_NEAR(g->curve[k].signal, p->curve[k].signal, 1e-8) << p->curve[k].volume_ml << " mL";
  }
  // One break at Ve = 25.0 mL; for a 1:1 titration with large C K' the steepest
  // point lies at the equivalence point (to a few thousandths of a mL here).
  ASSERT_EQ(p->breaks.size(), 1u);
  EXPECT_NEAR(p->breaks[0].equivalence_volume_ml, 25.0, 1e-12);
  EXPECT_NEAR(p->breaks[0].inflection_volume_ml, 25.0, 0.01);
  EXPECT_NEAR(g->breaks[0].p_metal_jump, p->breaks[0].p_metal_jump, 1e-6);
  // pCa from 99 % to 101 %: [Ca] = 0.01 C and [Ca] = 1/(100 K') either side,
  // so the jump is log10(C K') - 4 with C = 0.0267 M at Ve (hand derivation).
  const double k_prime = 0.2990 * std::pow(10.0, 10.65);
  EXPECT_NEAR(p->breaks[0].p_metal_jump, std::log10(0.04 * 50.0 / 75.0 * k_prime) - 4.0, 0.01);
  ASSERT_EQ(p->feasibility.metals.size(), 1u);
  EXPECT_TRUE(p->feasibility.metals[0].sharp);
}

TEST(Prediction, IndicatorErrorMatchesRingbomFormula) {
  // Invariant: Ringbom's titration-error formula (Ringbom, Complexation in
  // Analytical Chemistry, 1963; recalled from memory)
  //   error = (10^dpM - 10^-dpM) / sqrt(K' C_eq),  dpM = pM(end) - pM(eq),
  // with pM(end) = log K'(MgIn) for a trace of indicator. Magnesium with
  // Eriochrome Black T at pH 10 from the shipped library.
  const auto lib = builtin();
  SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Mg", 0.01}};
  s.ph = 10.0;
  s.titrant = {"EDTA", 0.01, 2.0};
  s.indicator = IndicatorSpec{"Eriochrome Black T", 1e-8};
  auto p = predict(lib, s);
  ASSERT_TRUE(p.has_value()) << p.error().message;
  ASSERT_TRUE(p->indicator.has_value());
  const auto* ebt = lib.find_ligand("Eriochrome Black T");
  auto log_alpha_mg = log10_metal_side_reaction(lib, "Mg", 10.0, {}, true);
  ASSERT_TRUE(log_alpha_mg.has_value());
  const double pm_end =
      ebt->one_to_one("Mg")->value.log10_beta - log10_proton_side_reaction(*ebt, 10.0) + 0.0;
  const auto& mf = p->feasibility.metals[0];
  const double c_eq = 0.005;
  const double k = std::pow(10.0, mf.conditional.log10_conditional);
  // pM of free Mg2+ at the equivalence point, then as pMg' (all Mg not bound to EDTA).
  const double pm_eq = 0.5 * (std::log10(k) - std::log10(c_eq)) + *log_alpha_mg;
  const double d = pm_end - pm_eq;
  const double ringbom = (std::pow(10.0, d) - std::pow(10.0, -d)) / std::sqrt(k * c_eq) * 100.0;
  EXPECT_NEAR(p->indicator->titration_error_percent, ringbom, 0.02 * std::abs(ringbom) + 1e-4);
  EXPECT_EQ(p->indicator->metal, "Mg");
}

TEST(Prediction, ElectrodePotentialFollowsNernst) {
  // Invariant: an ideal electrode for a 2+ ion at 25 degC changes by
  // -(RT ln10 / 2F) = -29.58 mV per unit of pM.
  const auto lib = harris_library();
  auto s = harris_calcium_sample();
  s.signal.kind = SignalKind::potential;
  s.signal.standard_potential_mv = 100.0;
  auto p = predict(lib, s);
  ASSERT_TRUE(p.has_value()) << p.error().message;
  for (std::size_t k = 1; k < p->curve.size(); k += 10) {
    const double e = 100.0 - 29.58 * p->curve[k].p_metal[0];
    EXPECT_NEAR(p->curve[k].signal, e, 0.01 * p->curve[k].p_metal[0] + 1e-9);
  }
}

TEST(Prediction, AbsorbanceObeysBeerLambert) {
  // After the endpoint the indicator is free; at pH 10 it is almost all HIn2-
  // (pKa 11.6), so A = b eps(HIn) C_In (diluted) within the small In3- share.
  const auto lib = builtin();
  SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Mg", 0.01}};
  s.ph = 10.0;
  s.titrant = {"EDTA", 0.02, 2.0};
  s.indicator = IndicatorSpec{"Eriochrome Black T", 5e-5};
  s.signal.kind = SignalKind::absorbance;
  s.signal.wavelength_nm = 620.0;
  s.curve.end_volume_ml = 50.0;
  auto p = predict(lib, s);
  ASSERT_TRUE(p.has_value()) << p.error().message;
  const auto& last = p->curve.back();
  const double c_in = 5e-5 * 50.0 / 100.0;
  const double h_in_share = 1.0 / (1.0 + std::pow(10.0, 10.0 - 11.6) + std::pow(10.0, 6.3 - 10.0));
  EXPECT_NEAR(last.signal, 2.0e4 * c_in * h_in_share, 0.01 * last.signal);
  ASSERT_EQ(p->breaks.size(), 1u);
  EXPECT_GT(p->breaks[0].signal_jump, 0.0);  // red to blue: absorbance at 620 nm rises
  EXPECT_LT(p->curve.front().signal, 0.5 * last.signal);
}

TEST(Feasibility, CalciumMagnesiumTogetherZincMaskedByCyanide) {
  const auto lib = builtin();
  SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Ca", 0.01}, {"Mg", 0.01}};
  s.ph = 10.0;
  s.ligands = {{"ammonia", 0.1, 0.0}};
  // 0.05 M titrant keeps the dilution small: Mg at pH 10 meets log10(C K') >= 6
  // only at C above about 0.006 M (log K'(MgY) = 8.25 there).
  s.titrant = {"EDTA", 0.05, 2.0};
  auto f = assess_feasibility(lib, s);
  ASSERT_TRUE(f.has_value()) << f.error().message;
  ASSERT_EQ(f->pairs.size(), 1u);
  // Common practice: Ca and Mg are titrated together at pH 10 (water hardness).
  EXPECT_FALSE(f->pairs[0].in_sequence);
  EXPECT_EQ(f->pairs[0].first, "Ca");
  EXPECT_TRUE(f->metals[0].sharp);
  EXPECT_TRUE(f->metals[1].sharp);

  // Common practice: zinc is masked with cyanide so that magnesium can be
  // titrated alone (Mg forms no cyanide complex).
  s.metals = {{"Zn", 0.01}, {"Mg", 0.01}};
  f = assess_feasibility(lib, s);
  ASSERT_TRUE(f.has_value()) << f.error().message;
  bool cyanide_for_mg = false;
  for (const auto& [agent, metal] : f->pairs[0].masking) {
    cyanide_for_mg = cyanide_for_mg || (agent == "cyanide" && metal == "Mg");
  }
  EXPECT_TRUE(cyanide_for_mg) << f->pairs[0].verdict;

  // Common practice: iron(III) is titrated with EDTA at pH 2-3, where calcium
  // does not react; the selective window must include pH 2.
  s.metals = {{"Fe(III)", 0.01}, {"Ca", 0.01}};
  s.ligands.clear();
  s.ph = 2.0;
  f = assess_feasibility(lib, s);
  ASSERT_TRUE(f.has_value()) << f.error().message;
  EXPECT_EQ(f->pairs[0].first, "Fe(III)");
  bool at_two = false;
  for (const auto& [lo, hi] : f->pairs[0].selective_ph_windows)
    at_two = at_two || (lo <= 2.0 && 2.0 <= hi);
  EXPECT_TRUE(at_two);
  // Calcium alone needs an alkaline sample: its window starts above pH 7
  // (log Kf 10.65; Reilley-Schmid minimum pH about 7.5, recalled from memory).
  ASSERT_FALSE(f->metals[1].ph_windows.empty());
  EXPECT_GT(f->metals[1].ph_windows.front().first, 7.0);
  EXPECT_LT(f->metals[1].ph_windows.front().first, 8.5);
}

TEST(Prediction, TwoMetalsGiveTwoBreaksInOrder) {
  const auto lib = builtin();
  SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Mg", 0.01}, {"Zn", 0.01}};
  s.ph = 10.0;
  s.ligands = {{"ammonia", 0.1, 0.0}};
  s.titrant = {"EDTA", 0.02, 2.0};
  auto p = predict(lib, s);
  ASSERT_TRUE(p.has_value()) << p.error().message;
  ASSERT_EQ(p->breaks.size(), 2u);
  EXPECT_EQ(p->breaks[0].metal, "Zn");  // stronger conditional constant first
  EXPECT_NEAR(p->breaks[0].equivalence_volume_ml, 25.0, 1e-9);
  EXPECT_NEAR(p->breaks[1].equivalence_volume_ml, 50.0, 1e-9);
  EXPECT_GT(p->breaks[1].p_metal_jump, 1.0);
  EXPECT_FALSE(p->closed_form_used);
}

TEST(Prediction, ProtonBalanceFollowsTitrantAcid) {
  // Without a fixed pH, Na2H2Y releases two H+ per metal bound: an unbuffered
  // calcium sample turns acid, so pH falls along the curve (invariant).
  const auto lib = builtin();
  SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Ca", 0.001}};
  s.titrant = {"EDTA", 0.01, 2.0};
  auto p = predict(lib, s);
  ASSERT_TRUE(p.has_value()) << p.error().message;
  EXPECT_GT(p->curve.front().ph, 6.0);
  EXPECT_LT(p->curve.back().ph, 5.0);
}

TEST(SampleDocument, ParsesAndNamesBadFields) {
  const char* good = R"({
    "sample_volume_ml": 50, "metals": [{"name": "Zn", "conc_mol_per_l": 0.001}],
    "ph": 10, "buffer": {"name": "ammonia", "total_mol_per_l": 0.1},
    "titrant": {"name": "EDTA", "conc_mol_per_l": 0.001},
    "indicator": {"name": "Eriochrome Black T", "conc_mol_per_l": 1e-5},
    "signal": {"kind": "absorbance", "wavelength_nm": 620}, "curve": {"points": 101}})";
  auto s = parse_sample_json(good);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_EQ(s->metals[0].name, "Zn");
  EXPECT_EQ(s->ligands[0].name, "ammonia");
  EXPECT_EQ(s->curve.points, 101);
  EXPECT_EQ(s->signal.kind, SignalKind::absorbance);
  // Round trip through to_json.
  auto again = parse_sample_json(to_json(*s).dump());
  ASSERT_TRUE(again.has_value()) << again.error().message;
  EXPECT_EQ(to_json(*again), to_json(*s));

  auto expect_error = [](const std::string& doc, const std::string& fragment) {
    auto r = parse_sample_json(doc);
    ASSERT_FALSE(r.has_value()) << doc;
    EXPECT_NE(r.error().message.find(fragment), std::string::npos) << r.error().message;
  };
  expect_error("{", "not valid JSON");
  expect_error(R"({"sample_volume_ml": 50, "metals": [{"name": "Zn", "conc_mol_per_l": -1}],
      "titrant": {"conc_mol_per_l": 0.01}})",
               "metals[0].conc_mol_per_l");
  expect_error(R"({"sample_volume_ml": 50, "metals": [{"name": "Zn", "conc_mol_per_l": 0.01}],
      "titrant": {"conc_mol_per_l": 0.01}, "colour": 3})",
               "'colour'");
  expect_error(
      R"({"metals": [{"name": "Zn", "conc_mol_per_l": 0.01}], "titrant": {"conc_mol_per_l": 0.01}})",
      "sample_volume_ml");
  expect_error(R"({"sample_volume_ml": 50, "metals": [{"name": "Zn", "conc_mol_per_l": 0.01}],
      "ph": 19, "titrant": {"conc_mol_per_l": 0.01}})",
               "ph");
  // Known format but unknown chemistry: the model names what is missing.
  auto unknown = parse_sample_json(R"({"sample_volume_ml": 50,
      "metals": [{"name": "Unobtainium", "conc_mol_per_l": 0.01}], "titrant": {"conc_mol_per_l": 0.01}})");
  ASSERT_TRUE(unknown.has_value());
  auto p = predict(builtin(), *unknown);
  ASSERT_FALSE(p.has_value());
  EXPECT_NE(p.error().message.find("Unobtainium"), std::string::npos);
}

TEST(Speciation, ReportAddsUpAndSerialises) {
  const auto lib = builtin();
  auto s = parse_sample_json(R"({"sample_volume_ml": 50,
      "metals": [{"name": "Zn", "conc_mol_per_l": 0.001}], "ph": 10,
      "buffer": {"name": "ammonia", "total_mol_per_l": 0.1},
      "titrant": {"name": "EDTA", "conc_mol_per_l": 0.001}})");
  ASSERT_TRUE(s.has_value());
  auto r = speciate(lib, *s, 20.0);
  ASSERT_TRUE(r.has_value()) << r.error().message;
  EXPECT_DOUBLE_EQ(r->ph, 10.0);
  for (const auto& c : r->components) {
    if (c.name == "H+")
      continue;
    double sum = 0.0;
    for (const auto& [form, f] : c.fractions)
      sum += f;
    EXPECT_NEAR(sum, 1.0, 1e-9) << c.name;
  }
  const auto j = to_json(*r);
  EXPECT_EQ(j["conditional_constants"][0]["metal"], "Zn");
  EXPECT_TRUE(j["components"].is_array());
}

}  // namespace
}  // namespace veq::chemistry
