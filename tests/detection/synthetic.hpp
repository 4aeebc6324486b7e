// Synthetic titration curves with a known equivalence volume, for the
// detection tests: the exact 1:1 closed form of veq_chemistry plus the Nernst
// equation, sampled at chosen volumes with seeded Gaussian noise.
#pragma once

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <random>
#include <utility>
#include <vector>

#include "chemistry/one_to_one.hpp"
#include "detection/curve.hpp"

namespace veq::detection::testing {

// Nernst slope for a divalent ion at 25 °C: (RT ln 10)/(2F) = 59.16/2 mV per
// decade (any physical chemistry text; 59.16 mV at 298.15 K).
inline constexpr double kNernstSlopeCalciumMv = 59.16 / 2.0;

// log10 Kf of CaY2- = 10.65 and alpha(Y4-) = 0.30 at pH 10.00: D. C. Harris,
// Quantitative Chemical Analysis, 8th ed., Table 11-1 and Section 11-3
// (the same values as tests/chemistry, recalled from memory).
inline double calcium_edta_ph10_constant() {
  return 0.30 * std::pow(10.0, 10.65);
}

struct PotentialCurveSpec {
  double metal_conc_mol_per_l = 0.01;   // invented demo sample
  double sample_volume_ml = 50.0;       // invented demo sample
  double equivalence_volume_ml = 10.0;  // sets the titrant concentration
  double conditional_constant = calcium_edta_ph10_constant();
  double electrode_zero_mv = 150.0;  // invented demo electrode offset
  double noise_sd_mv = 0.1;
};

// E = E0 - (59.16/2) pCa at each volume, plus N(0, noise) from `rng`.
inline std::vector<double> potential_mv(const PotentialCurveSpec& spec,
                                        const std::vector<double>& volume_ml,
                                        std::mt19937_64& rng) {
  veq::chemistry::OneToOneTitration t;
  t.metal_conc_mol_per_l = spec.metal_conc_mol_per_l;
  t.sample_volume_ml = spec.sample_volume_ml;
  t.titrant_conc_mol_per_l =
      spec.metal_conc_mol_per_l * spec.sample_volume_ml / spec.equivalence_volume_ml;
  t.conditional_constant = spec.conditional_constant;
  std::normal_distribution<double> noise(0.0, spec.noise_sd_mv);
  std::vector<double> e;
  e.reserve(volume_ml.size());
  for (double v : volume_ml) {
    const double clean =
        spec.electrode_zero_mv - kNernstSlopeCalciumMv * veq::chemistry::p_metal(t, v);
    e.push_back(spec.noise_sd_mv > 0.0 ? clean + noise(rng) : clean);
  }
  return e;
}

// Volumes 0, step, 2 step, ... up to end_ml.
inline std::vector<double> fixed_steps(double step_ml, double end_ml) {
  std::vector<double> v;
  for (int i = 0; i * step_ml <= end_ml + 1e-9; ++i)
    v.push_back(i * step_ml);
  return v;
}

// Steps that shrink near an expected endpoint, as a titrator doses: `coarse_ml`
// far from `expected_ml`, falling to `fine_ml` within `fine_zone_ml` of it.
inline std::vector<double> shrinking_steps(double coarse_ml, double fine_ml, double expected_ml,
                                           double fine_zone_ml, double end_ml) {
  std::vector<double> v{0.0};
  while (v.back() < end_ml) {
    const double distance = std::abs(v.back() - expected_ml);
    const double step = distance < fine_zone_ml
                            ? fine_ml + (coarse_ml - fine_ml) * distance / fine_zone_ml
                            : coarse_ml;
    v.push_back(v.back() + step);
  }
  return v;
}

inline Curve make_curve(std::vector<double> volume_ml, std::vector<double> signal,
                        SignalKind kind = SignalKind::potential_mv, double sample_volume_ml = 0.0) {
  CurveColumns c;
  c.volume_ml = std::move(volume_ml);
  c.signal = std::move(signal);
  c.kind = kind;
  c.sample_volume_ml = sample_volume_ml;
  return Curve::from_columns(std::move(c)).value();
}

struct ErrorStats {
  double mean = 0.0;
  double sd = 0.0;
  double max_abs = 0.0;
};

inline ErrorStats stats(const std::vector<double>& errors) {
  ErrorStats s;
  for (double x : errors) {
    s.mean += x;
    s.max_abs = std::max(s.max_abs, std::abs(x));
  }
  s.mean /= static_cast<double>(errors.size());
  for (double x : errors)
    s.sd += (x - s.mean) * (x - s.mean);
  s.sd = std::sqrt(s.sd / static_cast<double>(errors.size() - 1));
  return s;
}

}  // namespace veq::detection::testing

namespace veq::detection::testing {

// A photometric 1:1 titration: the metal ion and its chelate absorb at the
// measuring wavelength (path 1 cm), the free titrant does not. Molar
// absorptivities are invented for the demo; the shape (two straight lines
// after dilution correction, rounded near the equivalence point when K' is
// modest) follows from Beer's law and the exact 1:1 mass balances.
struct PhotometricCurveSpec {
  double metal_conc_mol_per_l = 0.002;
  double sample_volume_ml = 50.0;
  double equivalence_volume_ml = 10.0;
  double conditional_constant = 1e6;
  double metal_absorptivity_l_per_mol_cm = 10.0;
  double chelate_absorptivity_l_per_mol_cm = 100.0;
  double noise_sd = 0.001;  // absorbance
};

inline std::vector<double> absorbance(const PhotometricCurveSpec& spec,
                                      const std::vector<double>& volume_ml, std::mt19937_64& rng) {
  veq::chemistry::OneToOneTitration t;
  t.metal_conc_mol_per_l = spec.metal_conc_mol_per_l;
  t.sample_volume_ml = spec.sample_volume_ml;
  t.titrant_conc_mol_per_l =
      spec.metal_conc_mol_per_l * spec.sample_volume_ml / spec.equivalence_volume_ml;
  t.conditional_constant = spec.conditional_constant;
  std::normal_distribution<double> noise(0.0, spec.noise_sd);
  std::vector<double> a;
  a.reserve(volume_ml.size());
  for (double v : volume_ml) {
    const double total_metal =
        t.metal_conc_mol_per_l * t.sample_volume_ml / (t.sample_volume_ml + v);
    const double free_metal = veq::chemistry::free_metal_mol_per_l(t, v);
    const double clean = spec.metal_absorptivity_l_per_mol_cm * free_metal +
                         spec.chelate_absorptivity_l_per_mol_cm * (total_metal - free_metal);
    a.push_back(spec.noise_sd > 0.0 ? clean + noise(rng) : clean);
  }
  return a;
}

}  // namespace veq::detection::testing
