// Standard atomic weights and molar masses of formulas, for turning amounts
// of substance into masses in results and for primary standards.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::chemistry {

/// One element's standard atomic weight.
struct AtomicWeight {
  std::string_view symbol;
  /// g/mol: the IUPAC standard atomic weight; for elements whose weight
  /// IUPAC gives as an interval (H, C, N, O, Mg, S, Cl, B, Li, Si), the
  /// conventional value of the abridged table.
  double g_per_mol;
};

/// Where the table comes from.
inline constexpr std::string_view kAtomicWeightsSource =
    "IUPAC Commission on Isotopic Abundances and Atomic Weights, standard atomic weights "
    "2021 (conventional values for interval elements); values recalled from memory";

/// The elements veq's samples, titrants, buffers and standards use.
const std::vector<AtomicWeight>& atomic_weights();

/// g/mol of one element by its symbol ("Ca", "Zn"); an error naming it
/// when the table has no such element.
veq::Result<double> atomic_weight_g_per_mol(std::string_view symbol);

/// g/mol of a chemical formula: element symbols with counts, parentheses
/// with a count ("(NH4)2SO4"), and adducts after a dot or a middle dot with
/// a leading count ("MgSO4·7H2O", "C10H14N2Na2O8.2H2O"). Errors name the
/// position: an unknown element, an unbalanced parenthesis, a zero count,
/// an unexpected character.
veq::Result<double> molar_mass_g_per_mol(std::string_view formula);

}  // namespace veq::chemistry
