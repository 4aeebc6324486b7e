#include "chemistry/ligand.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <vector>

namespace veq::chemistry {

double log10_fully_deprotonated_fraction(std::span<const double> pka_values, double ph) {
  if (!std::isfinite(ph))
    throw std::invalid_argument("pH is not a finite number");
  std::vector<double> pka(pka_values.begin(), pka_values.end());
  for (double p : pka) {
    if (!std::isfinite(p))
      throw std::invalid_argument("a pKa value is not a finite number");
  }
  // Sorted ascending: K1 is the strongest acid step (smallest pKa).
  std::sort(pka.begin(), pka.end());
  const std::size_t n = pka.size();
  // Term j (j protons bound) relative to the fully deprotonated form:
  // log([H]^j / (K_n K_(n-1) ... K_(n-j+1))) = j*(-pH) + sum of the j largest pKa.
  std::vector<double> log_terms(n + 1, 0.0);
  double sum_pka = 0.0;
  for (std::size_t j = 1; j <= n; ++j) {
    sum_pka += pka[n - j];
    log_terms[j] = sum_pka - static_cast<double>(j) * ph;
  }
  const double largest = *std::max_element(log_terms.begin(), log_terms.end());
  double total = 0.0;
  for (double t : log_terms)
    total += std::pow(10.0, t - largest);
  return -(largest + std::log10(total));
}

double fully_deprotonated_fraction(std::span<const double> pka_values, double ph) {
  return std::pow(10.0, log10_fully_deprotonated_fraction(pka_values, ph));
}

double conditional_formation_constant(double log10_kf, double alpha_ligand, double alpha_metal) {
  return std::pow(10.0, log10_kf) * alpha_ligand * alpha_metal;
}

}  // namespace veq::chemistry
