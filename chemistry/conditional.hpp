// Side-reaction coefficients and conditional formation constants from the
// constants library (A. Ringbom, Complexation in Analytical Chemistry, 1963), and
// species distributions versus pH from the general solver.
#pragma once

#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "chemistry/constants.hpp"
#include "chemistry/equilibrium.hpp"
#include "common/result.hpp"

namespace veq::chemistry {

/// Dimensionless log10 of the side-reaction coefficient of a ligand with H+,
/// alpha_L(H) = 1 + sum_n beta_HnL [H+]^n (Ringbom's alpha, >= 1). Harris's
/// fraction alpha(Y4-) of the fully deprotonated form is its reciprocal.
double log10_proton_side_reaction(const LigandEntry& ligand, double ph);

/// A ligand and its free (uncomplexed, all protonation forms counted apart) concentration.
struct FreeLigand {
  std::string ligand;
  double free_mol_per_l = 0.0;  ///< mol/L of the fully deprotonated form
};

/// A ligand and its analytical concentration.
struct LigandTotal {
  std::string ligand;
  double total_mol_per_l = 0.0;  ///< mol/L, all forms
};

/// Dimensionless log10 of the metal's side-reaction coefficient
/// alpha_M = 1 + sum_n *beta_n / [H+]^n + sum_L sum_n beta_MLn [L]^n
/// over the mononuclear hydrolysis species (when `hydrolysis`) and the
/// mononuclear, unprotonated complexes with the given free ligands.
/// Harris's fraction of free metal (e.g. alpha(Zn2+)) is its reciprocal.
Result<double> log10_metal_side_reaction(const ConstantsLibrary& library, std::string_view metal,
                                         double ph, std::span<const FreeLigand> free_ligands,
                                         bool hydrolysis = true);

/// The pieces of a conditional formation constant K' = Kf / (alpha_M alpha_Y).
struct ConditionalConstant {
  double log10_kf = 0.0;               ///< log10 of the 1:1 constant, L/mol
  double log10_alpha_titrant = 0.0;    ///< log10 alpha_Y(H), titrant protonation
  double log10_alpha_metal = 0.0;      ///< log10 alpha_M, auxiliary ligands and hydroxide
  double log10_alpha_auxiliary = 0.0;  ///< log10 alpha_M from the auxiliary ligands alone
  double log10_conditional = 0.0;      ///< log10 K', L/mol
};

/// Conditional constant of the 1:1 metal-titrant complex at a pH with auxiliary
/// ligands given by their totals. As in the textbook treatment, each auxiliary
/// ligand is taken to be in large excess over the metal, so its free
/// concentration is total / alpha_L(H). Errors name a missing constant.
Result<ConditionalConstant> conditional_constant(const ConstantsLibrary& library,
                                                 std::string_view metal, std::string_view titrant,
                                                 double ph, std::span<const LigandTotal> auxiliary,
                                                 bool hydrolysis = true);

/// Fractions of one component's total in each form that contains it, at a
/// series of pH values.
struct Distribution {
  std::string component;
  std::vector<std::string> forms;  ///< the free component first, then its species
  std::vector<double> ph;
  /// fraction[k][f]: at ph[k], fraction of the component's total in forms[f]
  /// (counting the component's coefficient, so the fractions add up to 1).
  std::vector<std::vector<double>> fraction;
};

/// Solves the system at each pH (warm-started from the previous one) with the
/// totals of `base`, and reports how `component` is distributed.
Result<Distribution> distribution_vs_ph(EquilibriumSolver& solver, const Conditions& base,
                                        int component, std::span<const double> ph_values);

}  // namespace veq::chemistry
