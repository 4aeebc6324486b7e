#include "chemistry/one_to_one.hpp"

#include <cmath>
#include <stdexcept>

namespace veq::chemistry {

namespace {
void check(const OneToOneTitration& t, double added_ml) {
  if (!(t.metal_conc_mol_per_l > 0.0) || !(t.sample_volume_ml > 0.0) ||
      !(t.titrant_conc_mol_per_l > 0.0) || !(t.conditional_constant > 0.0) ||
      !std::isfinite(t.conditional_constant)) {
    throw std::invalid_argument(
        "1:1 titration needs positive, finite metal and titrant concentrations, sample volume "
        "and conditional constant");
  }
  if (!(added_ml >= 0.0) || !std::isfinite(added_ml)) {
    throw std::invalid_argument("added titrant volume must be a finite number >= 0 mL");
  }
}
}  // namespace

double equivalence_volume_ml(const OneToOneTitration& t) {
  check(t, 0.0);
  return t.metal_conc_mol_per_l * t.sample_volume_ml / t.titrant_conc_mol_per_l;
}

double free_metal_mol_per_l(const OneToOneTitration& t, double added_ml) {
  check(t, added_ml);
  const double total_ml = t.sample_volume_ml + added_ml;
  const double c_m = t.metal_conc_mol_per_l * t.sample_volume_ml / total_ml;
  const double c_y = t.titrant_conc_mol_per_l * added_ml / total_ml;
  const double k = t.conditional_constant;
  // k m^2 + b m - c_m = 0 with b = 1 + k (c_y - c_m); the positive root.
  const double b = 1.0 + k * (c_y - c_m);
  const double disc = std::sqrt(b * b + 4.0 * k * c_m);
  if (b >= 0.0) {
    // Titrant in excess (or near it): the root is the small difference of two
    // large numbers in the textbook form, so use the conjugate.
    return 2.0 * c_m / (b + disc);
  }
  return (-b + disc) / (2.0 * k);
}

double p_metal(const OneToOneTitration& t, double added_ml) {
  return -std::log10(free_metal_mol_per_l(t, added_ml));
}

}  // namespace veq::chemistry
