// Acid-base side reactions of a chelating ligand and conditional formation
// constants of 1:1 metal-ligand complexes. Pure computation, no I/O.
#pragma once

#include <span>

namespace veq::chemistry {

/// Fraction (dimensionless, 0..1) of a polyprotic ligand present in its fully
/// deprotonated form at a given pH, from its stepwise acid dissociation
/// constants given as pKa values in any order of protonation (they are sorted).
///
/// alpha = K1...Kn / ([H]^n + [H]^(n-1) K1 + ... + K1...Kn), the usual
/// definition (for EDTA, alpha of Y4- in Harris, Quantitative Chemical Analysis).
/// Computed in logarithms so that it stays finite at pH 0 for hexaprotic EDTA.
double fully_deprotonated_fraction(std::span<const double> pka_values, double ph);

/// Base-10 logarithm of fully_deprotonated_fraction(), finite where the
/// fraction itself underflows.
double log10_fully_deprotonated_fraction(std::span<const double> pka_values, double ph);

/// Conditional formation constant (L/mol) of a 1:1 complex:
/// K' = alpha_ligand * alpha_metal * Kf, where alpha_metal is the fraction of
/// metal not held by auxiliary ligands or hydroxide (1 when there are none).
double conditional_formation_constant(double log10_kf, double alpha_ligand,
                                      double alpha_metal = 1.0);

}  // namespace veq::chemistry
