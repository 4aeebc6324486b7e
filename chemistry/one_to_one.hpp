// The exact free-metal concentration of a 1:1 metal-chelate titration with
// dilution: the fast closed-form path of the equilibrium engine.
#pragma once

namespace veq::chemistry {

/// A metal titrated with a chelating titrant that forms one 1:1 complex.
struct OneToOneTitration {
  double metal_conc_mol_per_l = 0.0;    ///< analytical metal concentration in the sample, mol/L
  double sample_volume_ml = 0.0;        ///< sample volume in the vessel before titrant, mL
  double titrant_conc_mol_per_l = 0.0;  ///< titrant (chelator) concentration, mol/L
  double conditional_constant = 0.0;    ///< K' in L/mol (see conditional_formation_constant)
};

/// Equivalence volume in mL: metal amount / titrant concentration.
double equivalence_volume_ml(const OneToOneTitration& t);

/// Free (unbound by the titrant) metal concentration in mol/L after adding
/// added_ml of titrant, from the exact mass balances
///   C_M = [M'] + [MY],  C_Y = [Y'] + [MY],  [MY] = K' [M'] [Y']
/// with both totals diluted to (sample + added) volume. The quadratic
/// K' m^2 + (1 + K'(C_Y - C_M)) m - C_M = 0 is solved in the form that avoids
/// cancellation on either side of the equivalence point.
double free_metal_mol_per_l(const OneToOneTitration& t, double added_ml);

/// pM = -log10 of free_metal_mol_per_l().
double p_metal(const OneToOneTitration& t, double added_ml);

}  // namespace veq::chemistry
