#include "chemistry/conditional.hpp"

#include <algorithm>
#include <cmath>
#include <vector>

namespace veq::chemistry {

namespace {

// log10(sum 10^terms) without overflow.
double log10_sum(const std::vector<double>& terms) {
  const double top = *std::max_element(terms.begin(), terms.end());
  double sum = 0.0;
  for (double t : terms)
    sum += std::pow(10.0, t - top);
  return top + std::log10(sum);
}

}  // namespace

double log10_proton_side_reaction(const LigandEntry& ligand, double ph) {
  std::vector<double> terms = {0.0};
  for (const auto& p : ligand.protonation) {
    terms.push_back(p.value.log10_beta - p.protons * ph);
  }
  return log10_sum(terms);
}

Result<double> log10_metal_side_reaction(const ConstantsLibrary& library, std::string_view metal,
                                         double ph, std::span<const FreeLigand> free_ligands,
                                         bool hydrolysis) {
  const MetalEntry* m = library.find_metal(metal);
  if (!m) {
    return make_error(ErrorKind::invalid_input,
                      "metal '" + std::string(metal) + "' is not in the constants library");
  }
  std::vector<double> terms = {0.0};
  if (hydrolysis) {
    for (const auto& h : m->hydrolysis) {
      if (h.metals != 1)
        continue;  // polynuclear: depends on the metal's own level
      terms.push_back(h.value.log10_beta + h.hydroxide * ph);
    }
  }
  for (const auto& fl : free_ligands) {
    const LigandEntry* l = library.find_ligand(fl.ligand);
    if (!l) {
      return make_error(ErrorKind::invalid_input,
                        "ligand '" + fl.ligand + "' is not in the constants library");
    }
    if (!(fl.free_mol_per_l > 0.0))
      continue;
    const double log_l = std::log10(fl.free_mol_per_l);
    for (const auto& c : l->complexes) {
      if (c.metal != metal || c.metals != 1 || c.protons != 0)
        continue;
      terms.push_back(c.value.log10_beta + c.ligands * log_l);
    }
  }
  return log10_sum(terms);
}

Result<ConditionalConstant> conditional_constant(const ConstantsLibrary& library,
                                                 std::string_view metal, std::string_view titrant,
                                                 double ph, std::span<const LigandTotal> auxiliary,
                                                 bool hydrolysis) {
  const LigandEntry* y = library.find_ligand(titrant);
  if (!y) {
    return make_error(ErrorKind::invalid_input,
                      "titrant '" + std::string(titrant) + "' is not in the constants library");
  }
  const ComplexConstant* my = y->one_to_one(metal);
  if (!my) {
    return make_error(ErrorKind::invalid_input, "the constants library has no 1:1 constant of '" +
                                                    std::string(metal) + "' with '" +
                                                    std::string(titrant) + "'");
  }
  std::vector<FreeLigand> free;
  for (const auto& a : auxiliary) {
    const LigandEntry* l = library.find_ligand(a.ligand);
    if (!l) {
      return make_error(ErrorKind::invalid_input,
                        "ligand '" + a.ligand + "' is not in the constants library");
    }
    free.push_back(
        {a.ligand, a.total_mol_per_l / std::pow(10.0, log10_proton_side_reaction(*l, ph))});
  }
  ConditionalConstant k;
  k.log10_kf = my->value.log10_beta;
  k.log10_alpha_titrant = log10_proton_side_reaction(*y, ph);
  auto all = log10_metal_side_reaction(library, metal, ph, free, hydrolysis);
  if (!all)
    return all.error();
  auto aux = log10_metal_side_reaction(library, metal, ph, free, false);
  if (!aux)
    return aux.error();
  k.log10_alpha_metal = *all;
  k.log10_alpha_auxiliary = *aux;
  k.log10_conditional = k.log10_kf - k.log10_alpha_metal - k.log10_alpha_titrant;
  return k;
}

Result<Distribution> distribution_vs_ph(EquilibriumSolver& solver, const Conditions& base,
                                        int component, std::span<const double> ph_values) {
  const ChemicalSystem& system = solver.system();
  if (component < 0 || component >= static_cast<int>(system.components.size())) {
    return make_error(ErrorKind::invalid_input, "component index out of range");
  }
  const auto j = static_cast<std::size_t>(component);
  Distribution d;
  d.component = system.components[j].name;
  d.forms.push_back(d.component);
  std::vector<std::size_t> species;
  for (std::size_t i = 0; i < system.species.size(); ++i) {
    if (system.species[i].stoichiometry[j] > 0) {
      species.push_back(i);
      d.forms.push_back(system.species[i].name);
    }
  }
  Conditions c = base;
  Speciation s;
  Speciation previous;
  for (double ph : ph_values) {
    c.ph = ph;
    auto r = previous.log10_free.empty() ? solver.solve(c, s) : solver.solve_from(c, previous, s);
    if (!r)
      return r.error();
    std::vector<double> row;
    double total = s.free_mol_per_l[j];
    for (std::size_t i : species)
      total += system.species[i].stoichiometry[j] * s.species_mol_per_l[i];
    row.push_back(total > 0.0 ? s.free_mol_per_l[j] / total : 0.0);
    for (std::size_t i : species) {
      row.push_back(
          total > 0.0 ? system.species[i].stoichiometry[j] * s.species_mol_per_l[i] / total : 0.0);
    }
    d.ph.push_back(ph);
    d.fraction.push_back(std::move(row));
    previous = s;
  }
  return d;
}

}  // namespace veq::chemistry
